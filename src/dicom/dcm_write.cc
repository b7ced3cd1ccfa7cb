/*
 * dcm_write.cc - building DICOM files (dcm_builder_* in dcm.h) for the
 * simulator and test fixtures, with DCMTK's dcmdata, and structured-report
 * content with dcmsr.
 *
 * The builder never invents anything: no UID, no date, no time is
 * generated here, so the same calls give byte-identical files. The meta
 * header is filled by DCMTK from the dataset (Media Storage SOP Class and
 * Instance UID) plus DCMTK's fixed Implementation Class UID and Version
 * Name.
 */
#include "dicom/dcm.h"

#include <new>
#include <cstdlib>
#include <exception>
#include <mutex>
#include <vector>

#include <dcmtk/config/osconfig.h>
#include <dcmtk/dcmdata/dcpxitem.h>
#include <dcmtk/dcmdata/dcrleerg.h>
#include <dcmtk/dcmdata/dcrlerp.h>
#include <dcmtk/dcmdata/dctk.h>
#include <dcmtk/dcmjpeg/djencode.h>
#include <dcmtk/dcmjpeg/djrploss.h>
#include <dcmtk/dcmjpls/djencode.h>
#include <dcmtk/dcmjpls/djrparam.h>
#include <dcmtk/dcmsr/dsrdoc.h>

struct dcm_builder {
    DcmFileFormat file;
    std::vector<DcmItem *> stack; /* open sequence items, innermost last */
};

namespace
{

DcmItem *current_item(dcm_builder *builder)
{
    if (builder->stack.empty())
        return builder->file.getDataset();
    return builder->stack.back();
}

mitilog_status condition_error(mitilog_error *error, const OFCondition &cond, const char *what,
                               uint16_t group, uint16_t element)
{
    return mitilog_error_set(error, MITILOG_ERROR_INVALID, "%s (%04X,%04X): %s", what, group,
                             element, cond.text());
}

DcmEVR dictionary_vr(uint16_t group, uint16_t element)
{
    DcmTag tag(group, element);
    return tag.getEVR();
}

} // namespace

#define DCM_WRITE_CATCH(error)                                                                     \
    catch (const std::bad_alloc &)                                                                 \
    {                                                                                              \
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "out of memory building DICOM");     \
    }                                                                                              \
    catch (const std::exception &e)                                                                \
    {                                                                                              \
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "DICOM builder: %s", e.what());     \
    }                                                                                              \
    catch (...)                                                                                    \
    {                                                                                              \
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,                                     \
                                 "DICOM builder: unknown exception");                              \
    }

extern "C" mitilog_status dcm_builder_create(dcm_builder **out, mitilog_error *error)
{
    try {
        *out = new dcm_builder();
        return MITILOG_OK;
    }
    DCM_WRITE_CATCH(error)
}

extern "C" void dcm_builder_free(dcm_builder *builder)
{
    try {
        delete builder;
    } catch (...) {
    }
}

extern "C" mitilog_status dcm_builder_put_string(dcm_builder *builder, uint16_t group,
                                                 uint16_t element, const char *value,
                                                 mitilog_error *error)
{
    try {
        OFCondition cond = current_item(builder)->putAndInsertString(DcmTagKey(group, element),
                                                                     value != NULL ? value : "");
        if (cond.bad())
            return condition_error(error, cond, "put string", group, element);
        return MITILOG_OK;
    }
    DCM_WRITE_CATCH(error)
}

/* US, UL, SS, SL by dictionary VR; AT takes (group << 16) | element. */
extern "C" mitilog_status dcm_builder_put_unsigned(dcm_builder *builder, uint16_t group,
                                                   uint16_t element, uint32_t value,
                                                   mitilog_error *error)
{
    try {
        DcmItem *item = current_item(builder);
        DcmTagKey key(group, element);
        OFCondition cond;
        switch (dictionary_vr(group, element)) {
        case EVR_US:
            if (value > 0xFFFFu)
                return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                         "(%04X,%04X): %lu does not fit US", group, element,
                                         (unsigned long)value);
            cond = item->putAndInsertUint16(key, (Uint16)value);
            break;
        case EVR_UL: cond = item->putAndInsertUint32(key, (Uint32)value); break;
        case EVR_SS:
        case EVR_SL:
            if (value > 0x7FFFFFFFu)
                return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                         "(%04X,%04X): value too large", group, element);
            return dcm_builder_put_signed(builder, group, element, (int32_t)value, error);
        case EVR_AT:
            cond = item->putAndInsertTagKey(
                key, DcmTagKey((Uint16)(value >> 16), (Uint16)(value & 0xFFFF)));
            break;
        default:
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "(%04X,%04X) is not US/UL/SS/SL/AT", group, element);
        }
        if (cond.bad())
            return condition_error(error, cond, "put unsigned", group, element);
        return MITILOG_OK;
    }
    DCM_WRITE_CATCH(error)
}

extern "C" mitilog_status dcm_builder_put_signed(dcm_builder *builder, uint16_t group,
                                                 uint16_t element, int32_t value,
                                                 mitilog_error *error)
{
    try {
        DcmItem *item = current_item(builder);
        DcmTagKey key(group, element);
        OFCondition cond;
        switch (dictionary_vr(group, element)) {
        case EVR_SS:
            if (value < -32768 || value > 32767)
                return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                         "(%04X,%04X): %ld does not fit SS", group, element,
                                         (long)value);
            cond = item->putAndInsertSint16(key, (Sint16)value);
            break;
        case EVR_SL: cond = item->putAndInsertSint32(key, (Sint32)value); break;
        case EVR_US:
        case EVR_UL:
            if (value < 0)
                return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                         "(%04X,%04X): negative unsigned", group, element);
            return dcm_builder_put_unsigned(builder, group, element, (uint32_t)value, error);
        default:
            return mitilog_error_set(error, MITILOG_ERROR_INVALID, "(%04X,%04X) is not SS/SL/US/UL",
                                     group, element);
        }
        if (cond.bad())
            return condition_error(error, cond, "put signed", group, element);
        return MITILOG_OK;
    }
    DCM_WRITE_CATCH(error)
}

extern "C" mitilog_status dcm_builder_put_float(dcm_builder *builder, uint16_t group,
                                                uint16_t element, double value,
                                                mitilog_error *error)
{
    try {
        DcmItem *item = current_item(builder);
        DcmTagKey key(group, element);
        OFCondition cond;
        switch (dictionary_vr(group, element)) {
        case EVR_FD: cond = item->putAndInsertFloat64(key, value); break;
        case EVR_FL: cond = item->putAndInsertFloat32(key, (Float32)value); break;
        default:
            return mitilog_error_set(error, MITILOG_ERROR_INVALID, "(%04X,%04X) is not FD/FL",
                                     group, element);
        }
        if (cond.bad())
            return condition_error(error, cond, "put float", group, element);
        return MITILOG_OK;
    }
    DCM_WRITE_CATCH(error)
}

extern "C" mitilog_status dcm_builder_begin_item(dcm_builder *builder, uint16_t group,
                                                 uint16_t element, mitilog_error *error)
{
    try {
        if (dictionary_vr(group, element) != EVR_SQ)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID, "(%04X,%04X) is not a sequence",
                                     group, element);
        DcmItem *parent = current_item(builder);
        DcmItem *item = NULL;
        /* itemNum -2: append a new item at the end (creating the
         * sequence on first use). */
        OFCondition cond = parent->findOrCreateSequenceItem(DcmTagKey(group, element), item, -2);
        if (cond.bad() || item == NULL)
            return condition_error(error, cond, "begin item", group, element);
        builder->stack.push_back(item);
        return MITILOG_OK;
    }
    DCM_WRITE_CATCH(error)
}

extern "C" mitilog_status dcm_builder_end_item(dcm_builder *builder, mitilog_error *error)
{
    if (builder->stack.empty())
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "end item without an open item");
    builder->stack.pop_back();
    return MITILOG_OK;
}

extern "C" mitilog_status dcm_builder_put_pixels(dcm_builder *builder, const uint8_t *bytes,
                                                 size_t size, mitilog_error *error)
{
    try {
        if (size > 0xFFFFFFFEu || (size % 2) != 0)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "pixel data of %lu bytes: must be even", (unsigned long)size);
        OFCondition cond = builder->file.getDataset()->putAndInsertUint8Array(DCM_PixelData, bytes,
                                                                              (unsigned long)size);
        if (cond.bad())
            return condition_error(error, cond, "put pixels", 0x7FE0, 0x0010);
        return MITILOG_OK;
    }
    DCM_WRITE_CATCH(error)
}

namespace
{

/* At exit: DCMTK frees the list entries of its codecs only on
 * deregistration (a leak checker reports them otherwise). */
void deregister_encoders()
{
    DJEncoderRegistration::cleanup();
    DJLSEncoderRegistration::cleanup();
    DcmRLEEncoderRegistration::cleanup();
}

/* DCMTK keeps its codecs in one process-wide list; the encoders are
 * registered once, on the first compressed save, and stay registered
 * until exit. No new SOP Instance UID on lossy compression (EUC_never):
 * the builder never invents a UID, so the same calls still give the same
 * file. */
void register_encoders()
{
    static std::once_flag once;
    std::call_once(once, [] {
        DJEncoderRegistration::registerCodecs(ECC_lossyYCbCr, EUC_never);
        DJLSEncoderRegistration::registerCodecs(0, 0, 0, 0, OFTrue, 0, OFTrue, EJLSUC_never);
        DcmRLEEncoderRegistration::registerCodecs(OFFalse);
        std::atexit(deregister_encoders);
    });
}

/* DCMTK 3.6.7's JPEG-LS encoder rounds an odd-length frame up to even
 * length without writing the pad byte after the EOI marker, so the file
 * would carry one byte of whatever the buffer held: files would differ
 * from run to run. A fragment is padded with a trailing NULL byte (PS3.5
 * section A.4 and 8.2): this sets that byte, and nothing else, to 00. */
void zero_jpeg_ls_padding(DcmDataset *dataset)
{
    DcmElement *element = NULL;
    if (dataset->findAndGetElement(DCM_PixelData, element).bad() || element == NULL)
        return;
    DcmPixelData *pixel_data = OFstatic_cast(DcmPixelData *, element);
    E_TransferSyntax current = EXS_Unknown;
    const DcmRepresentationParameter *parameter = NULL;
    pixel_data->getCurrentRepresentationKey(current, parameter);
    DcmPixelSequence *sequence = NULL;
    if (current != EXS_JPEGLSLossless ||
        pixel_data->getEncapsulatedRepresentation(current, parameter, sequence).bad() ||
        sequence == NULL)
        return;
    for (unsigned long i = 1; i < sequence->card(); i++) { /* 0: offsets */
        DcmPixelItem *item = NULL;
        Uint8 *bytes = NULL;
        if (sequence->getItem(item, i).bad() || item == NULL || item->getUint8Array(bytes).bad() ||
            bytes == NULL)
            continue;
        Uint32 length = item->getLength();
        if (length >= 3 && length % 2 == 0 && bytes[length - 3] == 0xFF &&
            bytes[length - 2] == 0xD9)
            bytes[length - 1] = 0;
    }
}

/* Compresses the pixel data of the dataset to xfer, one of the encodings
 * dcm_builder_save accepts. */
mitilog_status encode_pixels(DcmDataset *dataset, E_TransferSyntax xfer, const char *path,
                             mitilog_error *error)
{
    register_encoders();
    DJ_RPLossy jpeg_quality(90);
    DJLSRepresentationParameter jpeg_ls_lossless(0, OFTrue);
    DcmRLERepresentationParameter rle;
    const DcmRepresentationParameter *parameter = NULL;
    switch (xfer) {
    case EXS_JPEGProcess1: parameter = &jpeg_quality; break;
    case EXS_JPEGLSLossless: parameter = &jpeg_ls_lossless; break;
    case EXS_RLELossless: parameter = &rle; break;
    default:
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "save %s: compressed transfer syntax %s not supported (JPEG "
                                 "baseline, JPEG-LS lossless and RLE lossless are)",
                                 path, DcmXfer(xfer).getXferID());
    }
    OFCondition cond = dataset->chooseRepresentation(xfer, parameter);
    if (cond.bad() || !dataset->canWriteXfer(xfer))
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "save %s: cannot compress the pixel data "
                                 "as %s: %s",
                                 path, DcmXfer(xfer).getXferName(),
                                 cond.bad() ? cond.text() : "encoder refused");
    if (xfer == EXS_JPEGLSLossless)
        zero_jpeg_ls_padding(dataset);
    return MITILOG_OK;
}

} // namespace

extern "C" mitilog_status dcm_builder_save(dcm_builder *builder, const char *path,
                                           const char *transfer_syntax_uid, mitilog_error *error)
{
    try {
        if (!builder->stack.empty())
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "save %s: %lu sequence item(s) open", path,
                                     (unsigned long)builder->stack.size());
        E_TransferSyntax xfer = EXS_LittleEndianExplicit;
        if (transfer_syntax_uid != NULL) {
            DcmXfer wanted(transfer_syntax_uid);
            xfer = wanted.getXfer();
            if (xfer == EXS_Unknown)
                return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                         "unsupported transfer syntax %s", transfer_syntax_uid);
            if (wanted.isEncapsulated()) {
                mitilog_status status =
                    encode_pixels(builder->file.getDataset(), xfer, path, error);
                if (status != MITILOG_OK)
                    return status;
            }
        }
        OFCondition cond = builder->file.saveFile(path, xfer, EET_ExplicitLength, EGL_recalcGL,
                                                  EPD_noChange, 0, 0, EWM_fileformat);
        if (cond.bad())
            return mitilog_error_set(error, MITILOG_ERROR_IO, "save %s: %s", path, cond.text());
        return MITILOG_OK;
    }
    DCM_WRITE_CATCH(error)
}

/* ------------------------------------------------------------------ */
/* Structured reports                                                  */
/* ------------------------------------------------------------------ */

namespace
{

OFString safe(const char *text) { return OFString(text != NULL ? text : ""); }

mitilog_status fill_sr_item(DSRDocumentTree &tree, const dcm_sr_build_item &spec, size_t index,
                            mitilog_error *error)
{
    DSRContentItem &item = tree.getCurrentContentItem();
    OFCondition cond = item.setConceptName(DSRCodedEntryValue(
        safe(spec.concept_code), safe(spec.concept_scheme), safe(spec.concept_meaning)));
    if (cond.good() && item.getValueType() == DSRTypes::VT_Num)
        cond = item.setNumericValue(DSRNumericMeasurementValue(
            safe(spec.numeric_value),
            DSRCodedEntryValue(safe(spec.unit_code), safe(spec.unit_scheme),
                               safe(spec.unit_meaning))));
    else if (cond.good() && item.getValueType() == DSRTypes::VT_Code)
        cond = item.setCodeValue(DSRCodedEntryValue(safe(spec.code_value), safe(spec.code_scheme),
                                                    safe(spec.code_meaning)));
    else if (cond.good() && item.getValueType() == DSRTypes::VT_Text)
        cond = item.setStringValue(safe(spec.text_value));
    if (cond.bad())
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "SR item %lu (%s %s): %s",
                                 (unsigned long)index, safe(spec.value_type).c_str(),
                                 safe(spec.concept_code).c_str(), cond.text());
    return MITILOG_OK;
}

/* The document-level attributes taken over from dcmsr's output. */
const DcmTagKey sr_copied_tags[] = {
    DCM_SOPClassUID,
    DCM_Modality,
    DCM_CodingSchemeIdentificationSequence,
    DCM_ValueType,
    DCM_ConceptNameCodeSequence,
    DCM_ContinuityOfContent,
    DCM_ContentTemplateSequence,
    DCM_ContentSequence,
    DCM_CompletionFlag,
    DCM_VerificationFlag,
    DCM_PerformedProcedureCodeSequence,
    DCM_ReferencedPerformedProcedureStepSequence,
};

} // namespace

extern "C" mitilog_status dcm_builder_put_sr_content(dcm_builder *builder,
                                                     const dcm_sr_build_item *items,
                                                     size_t item_count,
                                                     const dcm_sr_coding_scheme *schemes,
                                                     size_t scheme_count, mitilog_error *error)
{
    try {
        if (item_count == 0 || items[0].depth != 0)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "SR: the first item must be the root");
        DSRDocument document(DSRTypes::DT_ComprehensiveSR);
        DSRDocumentTree &tree = document.getTree();
        unsigned depth = 0;
        for (size_t i = 0; i < item_count; i++) {
            const dcm_sr_build_item &spec = items[i];
            DSRTypes::E_ValueType vt = DSRTypes::definedTermToValueType(safe(spec.value_type));
            if (vt == DSRTypes::VT_invalid)
                return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                         "SR item %lu: value type '%s'", (unsigned long)i,
                                         safe(spec.value_type).c_str());
            size_t node = 0;
            if (i == 0) {
                if (vt != DSRTypes::VT_Container)
                    return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                             "SR: root must be a CONTAINER");
                node = tree.addContentItem(DSRTypes::RT_isRoot, vt);
            } else {
                if (spec.depth == 0 || spec.depth > depth + 1)
                    return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                             "SR item %lu: depth %u after %u", (unsigned long)i,
                                             spec.depth, depth);
                DSRTypes::E_RelationshipType rt =
                    DSRTypes::definedTermToRelationshipType(safe(spec.relationship));
                if (rt == DSRTypes::RT_invalid || rt == DSRTypes::RT_unknown)
                    return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                             "SR item %lu: relationship '%s'", (unsigned long)i,
                                             safe(spec.relationship).c_str());
                if (spec.depth == depth + 1) {
                    node = tree.addContentItem(rt, vt, DSRTypes::AM_belowCurrent);
                } else {
                    for (unsigned up = depth; up > spec.depth; up--)
                        tree.goUp();
                    node = tree.addContentItem(rt, vt, DSRTypes::AM_afterCurrent);
                }
            }
            if (node == 0)
                return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                         "SR item %lu (%s %s) not allowed here", (unsigned long)i,
                                         safe(spec.value_type).c_str(),
                                         safe(spec.concept_code).c_str());
            depth = spec.depth;
            mitilog_status status = fill_sr_item(tree, spec, i, error);
            if (status != MITILOG_OK)
                return status;
        }
        for (size_t i = 0; i < scheme_count; i++) {
            OFCondition cond = document.getCodingSchemeIdentification().addItem(
                safe(schemes[i].designator), "", safe(schemes[i].name),
                safe(schemes[i].responsible_organization));
            if (cond.bad())
                return mitilog_error_set(error, MITILOG_ERROR_INVALID, "SR coding scheme %s: %s",
                                         safe(schemes[i].designator).c_str(), cond.text());
        }
        DcmDataset generated;
        OFCondition cond = document.write(generated);
        if (cond.bad())
            return mitilog_error_set(error, MITILOG_ERROR_INVALID, "SR write: %s", cond.text());
        DcmDataset *target = builder->file.getDataset();
        for (const DcmTagKey &key : sr_copied_tags) {
            DcmElement *element = NULL;
            if (generated.findAndGetElement(key, element, OFFalse, OFTrue).good() &&
                element != NULL) {
                cond = target->insert(element, OFTrue);
                if (cond.bad()) {
                    delete element;
                    return condition_error(error, cond, "SR copy", key.getGroup(),
                                           key.getElement());
                }
            }
        }
        /* SR Document Series: Type 2, present even if empty. */
        if (!target->tagExists(DCM_ReferencedPerformedProcedureStepSequence)) {
            cond = target->insertEmptyElement(DCM_ReferencedPerformedProcedureStepSequence);
            if (cond.bad())
                return condition_error(error, cond, "SR empty sequence", 0x0008, 0x1111);
        }
        return MITILOG_OK;
    }
    DCM_WRITE_CATCH(error)
}
