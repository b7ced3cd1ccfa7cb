/*
 * dcm_extra.cc - further facts for the exam context, read from a loaded
 * object: procedure code sequences, configured private attributes,
 * region spatial formats and the frame timing of enhanced multi-frame
 * objects (functional groups). Raw bytes; the C side decodes them.
 */
#include "dicom/dcm_internal.h"

#include "dcmtk/dcmdata/dcdatset.h"
#include "dcmtk/dcmdata/dcdeftag.h"
#include "dcmtk/dcmdata/dcfilefo.h"
#include "dcmtk/dcmdata/dcsequen.h"

#include <cstdlib>
#include <cstring>
#include <new>
#include <string>

static std::string dcm_extra_string(DcmItem &item, const DcmTagKey &tag)
{
    OFString value;
    if (item.findAndGetOFStringArray(tag, value).good())
        return std::string(value.c_str(), value.length());
    return std::string();
}

static void dcm_extra_codes(DcmItem &dataset, const DcmTagKey &sequence_tag, std::string &out)
{
    DcmSequenceOfItems *sequence = NULL;
    if (dataset.findAndGetSequence(sequence_tag, sequence).bad() || sequence == NULL)
        return;
    for (unsigned long i = 0; i < sequence->card(); i++) {
        DcmItem *item = sequence->getItem(i);
        if (item == NULL)
            continue;
        std::string code = dcm_extra_string(*item, DCM_CodeValue);
        if (code.empty())
            code = dcm_extra_string(*item, DcmTagKey(0x0008, 0x0119));
        std::string text = dcm_extra_string(*item, DCM_CodingSchemeDesignator) + ":" + code + " " +
                           dcm_extra_string(*item, DCM_CodeMeaning);
        for (char &c : text)
            if (c == '\\')
                c = '/';
        if (!out.empty())
            out += "\\";
        out += text;
    }
}

static char *dcm_extra_private(DcmItem &dataset, const dcm_private_request &request)
{
    if (request.private_creator == NULL || (request.group & 1) == 0)
        return NULL;
    for (Uint16 block = 0x10; block <= 0xFF; block++) {
        OFString creator;
        if (dataset.findAndGetOFString(DcmTagKey(request.group, block), creator).bad())
            continue;
        if (creator != request.private_creator)
            continue;
        DcmTagKey tag(request.group, static_cast<Uint16>((block << 8) | (request.element & 0xFF)));
        DcmElement *element = NULL;
        if (dataset.findAndGetElement(tag, element).bad() || element == NULL)
            return NULL;
        OFString value;
        if (element->getOFStringArray(value, OFTrue).bad())
            return NULL;
        return dcm_string_copy_length(value.c_str(), value.length());
    }
    return NULL;
}

static void dcm_extra_frame_content(DcmItem &group, dcm_extra *extra, std::string &earliest)
{
    DcmSequenceOfItems *content = NULL;
    if (group.findAndGetSequence(DcmTagKey(0x0020, 0x9111), content).bad() || content == NULL ||
        content->card() == 0)
        return;
    DcmItem *item = content->getItem(0);
    if (item == NULL)
        return;
    extra->frame_content_count++;
    Float64 duration = 0;
    if (item->findAndGetFloat64(DcmTagKey(0x0018, 0x9220), duration).good()) {
        extra->frame_duration_ms_sum += duration;
        extra->frame_duration_count++;
    }
    std::string when = dcm_extra_string(*item, DcmTagKey(0x0018, 0x9074));
    if (!when.empty() && (earliest.empty() || when < earliest))
        earliest = when;
}

static void dcm_extra_functional_groups(DcmItem &dataset, dcm_extra *extra)
{
    std::string earliest;
    const DcmTagKey groups[] = {DcmTagKey(0x5200, 0x9229), DcmTagKey(0x5200, 0x9230)};
    for (const DcmTagKey &tag : groups) {
        DcmSequenceOfItems *sequence = NULL;
        if (dataset.findAndGetSequence(tag, sequence).bad() || sequence == NULL)
            continue;
        extra->has_functional_groups = 1;
        for (unsigned long i = 0; i < sequence->card(); i++) {
            DcmItem *item = sequence->getItem(i);
            if (item != NULL)
                dcm_extra_frame_content(*item, extra, earliest);
        }
    }
    if (!earliest.empty())
        extra->first_frame_acquisition_datetime =
            dcm_string_copy_length(earliest.c_str(), earliest.length());
}

static void dcm_extra_regions(DcmItem &dataset, dcm_extra *extra)
{
    DcmSequenceOfItems *sequence = NULL;
    if (dataset.findAndGetSequence(DCM_SequenceOfUltrasoundRegions, sequence).bad() ||
        sequence == NULL || sequence->card() == 0)
        return;
    unsigned long count = sequence->card();
    extra->region_spatial_formats = static_cast<int *>(calloc(count, sizeof(int)));
    if (extra->region_spatial_formats == NULL)
        throw std::bad_alloc();
    extra->region_count = count;
    for (unsigned long i = 0; i < count; i++) {
        Uint16 format = 0;
        DcmItem *item = sequence->getItem(i);
        extra->region_spatial_formats[i] =
            item != NULL && item->findAndGetUint16(DCM_RegionSpatialFormat, format).good() ? format
                                                                                           : -1;
    }
}

mitilog_status dcm_object_extra(dcm_object *object, const dcm_private_request *requests,
                                size_t request_count, dcm_extra *extra, mitilog_error *error)
{
    if (extra == NULL || dcm_object_file(object) == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "dcm_object_extra: NULL argument");
    memset(extra, 0, sizeof *extra);
    try {
        DcmDataset &dataset = *dcm_object_file(object)->getDataset();
        std::string codes;
        dcm_extra_codes(dataset, DCM_ProcedureCodeSequence, codes);
        dcm_extra_codes(dataset, DCM_PerformedProtocolCodeSequence, codes);
        dcm_extra_codes(dataset, DCM_RequestedProcedureCodeSequence, codes);
        if (!codes.empty())
            extra->procedure_codes = dcm_string_copy_length(codes.c_str(), codes.length());
        for (size_t i = 0; i < request_count && i < DCM_EXTRA_PRIVATE_MAX; i++)
            extra->private_values[i] = dcm_extra_private(dataset, requests[i]);
        dcm_extra_regions(dataset, extra);
        dcm_extra_functional_groups(dataset, extra);
        return MITILOG_OK;
    } catch (...) {
        dcm_extra_free(extra);
        return dcm_error_from_exception(error, MITILOG_ERROR_PARSE, "dcm_object_extra");
    }
}

void dcm_extra_free(dcm_extra *extra)
{
    if (extra == NULL)
        return;
    free(extra->procedure_codes);
    for (int i = 0; i < DCM_EXTRA_PRIVATE_MAX; i++)
        free(extra->private_values[i]);
    free(extra->region_spatial_formats);
    free(extra->first_frame_acquisition_datetime);
    memset(extra, 0, sizeof *extra);
}
