/*
 * dcm_read.cc - reading DICOM files into plain C facts: raw attribute
 * strings (converted to UTF-8 where DCMTK can), ultrasound regions, the
 * transfer syntax, and the content tree of structured reports.
 */
#include "dicom/dcm_internal.h"

#include "dcmtk/dcmdata/dcdatset.h"
#include "dcmtk/dcmdata/dcdeftag.h"
#include "dcmtk/dcmdata/dcfilefo.h"
#include "dcmtk/dcmdata/dcmetinf.h"
#include "dcmtk/dcmdata/dcostrma.h"
#include "dcmtk/dcmdata/dcwcache.h"
#include "dcmtk/dcmdata/dcspchrs.h"
#include "dcmtk/dcmdata/dcxfer.h"
#include "dcmtk/dcmsr/dsrdoc.h"

extern "C" {
#include "util/log.h"
}

#include <algorithm>
#include <cerrno>
#include <cstdlib>
#include <cstring>
#include <memory>
#include <new>
#include <string>
#include <sys/stat.h>

struct dcm_object {
    DcmFileFormat file; /* large values are read lazily from path */
    std::string path;
    /* Bytes of the file before its top-level Pixel Data (all of it when
     * there is none); 0 when unknown (dcm_header_end) or when the loaded
     * object no longer matches the file (bulk data removed). */
    uint64_t header_end = 0;
};

DcmFileFormat *dcm_object_file(dcm_object *object) { return object != NULL ? &object->file : NULL; }

static const DcmTagKey dcm_attribute_tags[DCM_ATTRIBUTE_COUNT] = {
#define DCM_ATTRIBUTE_TAG(name, group, element) DcmTagKey(group, element),
    DCM_ATTRIBUTE_LIST(DCM_ATTRIBUTE_TAG)
#undef DCM_ATTRIBUTE_TAG
};

/* SR storage SOP classes all live under this root [std: DICOM PS3.4
 * B.5, e.g. Comprehensive SR 1.2.840.10008.5.1.4.1.1.88.33]. */
static const char dcm_sr_class_root[] = "1.2.840.10008.5.1.4.1.1.88.";

/* Where the file's top-level Pixel Data starts: the file's size less
 * the length DCMTK encodes that element with, when it is the last element
 * (as it nearly always is); the whole file when there is none; 0 when
 * unknown (pixels followed by more elements, a deflated data set whose
 * bytes are compressed). Checked against DCMTK's own stop at Pixel Data
 * (readUntilTag, stream position) on every fixture and simulated kind. */
static uint64_t dcm_header_end(DcmDataset &dataset, uint64_t file_size)
{
    E_TransferSyntax xfer = dataset.getOriginalXfer();
    if (xfer == EXS_Unknown || DcmXfer(xfer).getStreamCompression() != ESC_none)
        return 0;
    DcmElement *last = dataset.getElement(dataset.card() - 1);
    if (last == NULL)
        return 0;
    if (last->getTag() != DCM_PixelData)
        return dataset.tagExists(DCM_PixelData) ? 0 : file_size;
    E_EncodingType encoding =
        last->getLengthField() == DCM_UndefinedLength ? EET_UndefinedLength : EET_ExplicitLength;
    uint64_t pixels = last->calcElementLength(xfer, encoding);
    return pixels < file_size ? file_size - pixels : 0;
}

/* The first bytes of the file read as text: printable ASCII, tab, line
 * ends or bytes of UTF-8 sequences, nothing else. Not DICOM parsing: a
 * hint for the message only. */
static int dcm_file_looks_like_text(const char *path)
{
    unsigned char bytes[512];
    FILE *file = fopen(path, "rb");
    if (file == NULL)
        return 0;
    size_t count = fread(bytes, 1, sizeof bytes, file);
    fclose(file);
    if (count == 0)
        return 0;
    for (size_t i = 0; i < count; i++) {
        unsigned char c = bytes[i];
        if (!(c == '\t' || c == '\n' || c == '\r' || (c >= 0x20 && c < 0x7f) || c >= 0x80))
            return 0;
    }
    return 1;
}

/* Says in plain words why DCMTK could not read the file, from what it
 * did read: the Part 10 header (PS3.10 section 7.1: preamble, "DICM",
 * meta elements) and the elements of the data set up to the one where
 * reading stopped, which is the last one kept. */
static mitilog_status dcm_describe_load_failure(DcmFileFormat &file, uint64_t file_size,
                                                const char *path, const OFCondition &condition,
                                                mitilog_error *error)
{
    DcmMetaInfo *meta = file.getMetaInfo();
    DcmDataset *dataset = file.getDataset();
    int has_meta = meta != NULL && meta->card() > 0;
    DcmElement *first = dataset != NULL && dataset->card() > 0 ? dataset->getElement(0) : NULL;
    int first_known = first != NULL && first->getGTag() != 0x0000 &&
                      strcmp(DcmTag(first->getTag()).getTagName(), DcmTag_ERROR_TagName) != 0 &&
                      strcmp(DcmTag(first->getTag()).getTagName(), "Unknown Tag & Data") != 0;
    if (!has_meta && !first_known) {
        return mitilog_error_set(
            error, MITILOG_ERROR_PARSE,
            "not a DICOM file: it has no DICOM file header (\"DICM\" at byte 128) and its "
            "first bytes do not read as DICOM data elements%s; export it from the modality or "
            "PACS as a DICOM file",
            dcm_file_looks_like_text(path) ? " (it looks like a text file)" : "");
    }
    /* Where the element reading stopped starts: the Part 10 header, then
     * the data set's elements before it, at their encoded lengths. */
    DcmItem *item = dataset != NULL && dataset->card() > 0 ? static_cast<DcmItem *>(dataset)
                                                           : static_cast<DcmItem *>(meta);
    E_TransferSyntax xfer = item == dataset ? dataset->getOriginalXfer() : EXS_LittleEndianExplicit;
    if (item != NULL && item->card() > 0 && xfer != EXS_Unknown &&
        DcmXfer(xfer).getStreamCompression() == ESC_none) {
        uint64_t offset = 0;
        if (has_meta) {
            offset = 132; /* preamble and "DICM" */
            if (item == dataset)
                for (unsigned long i = 0; i < meta->card(); i++)
                    offset += meta->getElement(i)->calcElementLength(EXS_LittleEndianExplicit,
                                                                     EET_ExplicitLength);
        }
        for (unsigned long i = 0; i + 1 < item->card(); i++) {
            DcmElement *element = item->getElement(i);
            offset += element->calcElementLength(
                xfer, element->getLengthField() == DCM_UndefinedLength ? EET_UndefinedLength
                                                                       : EET_ExplicitLength);
        }
        DcmElement *last = item->getElement(item->card() - 1);
        DcmTag tag(last->getTag());
        Uint32 length = last->getLengthField();
        if (length != DCM_UndefinedLength) {
            uint64_t needed = offset + DcmXfer(xfer).sizeofTagHeader(last->getVR()) + length;
            if (needed > file_size)
                return mitilog_error_set(
                    error, MITILOG_ERROR_PARSE,
                    "truncated DICOM file: it ends at byte %llu of %llu; element %s %s at byte "
                    "%llu declares %lu bytes, larger than the rest of the file. It was cut "
                    "short in a copy or transfer: take it again from its source",
                    (unsigned long long)file_size, (unsigned long long)needed, tag.getTagName(),
                    tag.toString().c_str(), (unsigned long long)offset, (unsigned long)length);
        }
        return mitilog_error_set(
            error, MITILOG_ERROR_PARSE,
            "damaged or truncated DICOM file (%llu bytes): reading stopped in element %s %s "
            "at byte %llu (%s). Take it again from its source",
            (unsigned long long)file_size, tag.getTagName(), tag.toString().c_str(),
            (unsigned long long)offset, condition.text());
    }
    return mitilog_error_set(error, MITILOG_ERROR_PARSE,
                             "damaged or truncated DICOM file (%llu bytes): %s. Take it again "
                             "from its source",
                             (unsigned long long)file_size, condition.text());
}

mitilog_status dcm_object_load(const char *path, dcm_object **out, mitilog_error *error)
{
    if (path == NULL || out == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "dcm_object_load: NULL argument");
    *out = NULL;
    struct stat status;
    if (stat(path, &status) != 0)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "%s", strerror(errno));
    /* A FIFO or device would block the reader: regular files only. */
    if (!S_ISREG(status.st_mode))
        return mitilog_error_set(error, MITILOG_ERROR_PARSE, "not a regular file");
    if (status.st_size == 0)
        return mitilog_error_set(error, MITILOG_ERROR_PARSE, "empty file: not DICOM");
    try {
        std::unique_ptr<dcm_object> object(new dcm_object);
        object->path = path;
        /* ERM_autoDetect: Part 10 with a meta header, else a bare
         * dataset; values over DCM_MaxReadLength stay in the file. */
        OFCondition condition = object->file.loadFile(OFFilename(path), EXS_Unknown, EGL_noChange,
                                                      DCM_MaxReadLength, ERM_autoDetect);
        if (condition.bad())
            return dcm_describe_load_failure(object->file, static_cast<uint64_t>(status.st_size),
                                             path, condition, error);
        if (object->file.getDataset() == NULL || object->file.getDataset()->card() == 0)
            return mitilog_error_set(error, MITILOG_ERROR_PARSE,
                                     "no data elements: not a DICOM file");
        object->header_end =
            dcm_header_end(*object->file.getDataset(), static_cast<uint64_t>(status.st_size));
        *out = object.release();
        return MITILOG_OK;
    }
    DCM_CATCH_ALL(error, MITILOG_ERROR_PARSE, "dcm_object_load")
}

void dcm_object_free(dcm_object *object) { delete object; }

/* ------------------------------------------------------------------ */
/* Facts                                                               */
/* ------------------------------------------------------------------ */

/* The stored value: multi-valued joined by backslashes, padding kept.
 * (findAndGetOFStringArray has no normalize flag in 3.6.7 and strips the
 * padding, hence getOFStringArray(value, OFFalse) on the element.) */
static mitilog_status dcm_copy_raw_value(DcmElement &element, char **out, mitilog_error *error)
{
    OFString value;
    OFCondition condition = element.getOFStringArray(value, OFFalse);
    if (condition.bad() && element.getLength() != 0)
        return dcm_error_from_condition(error, MITILOG_ERROR_PARSE,
                                        DcmTag(element.getTag()).getTagName(), condition);
    *out = dcm_string_copy_length(value.c_str(), value.length());
    return MITILOG_OK;
}

static mitilog_status dcm_read_raw_value(DcmItem &item, const DcmTagKey &tag, char **out,
                                         mitilog_error *error)
{
    DcmElement *element = NULL;
    if (item.findAndGetElement(tag, element).bad() || element == NULL)
        return MITILOG_OK; /* absent: stays NULL */
    return dcm_copy_raw_value(*element, out, error);
}

/* The attributes of dcm_attribute_tags in ascending tag order. */
struct dcm_attribute_order {
    int attribute[DCM_ATTRIBUTE_COUNT];
    dcm_attribute_order()
    {
        for (int a = 0; a < DCM_ATTRIBUTE_COUNT; a++)
            attribute[a] = a;
        std::sort(attribute, attribute + DCM_ATTRIBUTE_COUNT,
                  [](int x, int y) { return dcm_attribute_tags[x] < dcm_attribute_tags[y]; });
    }
};

/* Reads the table's attributes from the top level of dataset, leaving
 * out skip (-1: none) and absent ones (NULL). The data set's elements are
 * in ascending tag order (DcmItem keeps them sorted) and so is
 * dcm_attribute_order, so one merging pass replaces a search per
 * attribute, which cost a tenth of an object's CPU. */
static mitilog_status dcm_read_raw_values(DcmItem &dataset, int skip, dcm_facts *facts,
                                          mitilog_error *error)
{
    static const dcm_attribute_order order; /* thread-safe, made once */
    int next = 0;
    for (DcmObject *object = dataset.nextInContainer(NULL);
         object != NULL && next < DCM_ATTRIBUTE_COUNT; object = dataset.nextInContainer(object)) {
        DcmTagKey key = object->getTag();
        while (next < DCM_ATTRIBUTE_COUNT && dcm_attribute_tags[order.attribute[next]] < key)
            next++;
        if (next == DCM_ATTRIBUTE_COUNT || !(dcm_attribute_tags[order.attribute[next]] == key))
            continue;
        int a = order.attribute[next++];
        if (a == skip)
            continue;
        mitilog_status status =
            dcm_copy_raw_value(*static_cast<DcmElement *>(object), &facts->values[a], error);
        if (status != MITILOG_OK)
            return status;
    }
    return MITILOG_OK;
}

static void dcm_read_regions(DcmItem &dataset, dcm_facts *facts)
{
    DcmSequenceOfItems *sequence = NULL;
    if (dataset.findAndGetSequence(DCM_SequenceOfUltrasoundRegions, sequence).bad() ||
        sequence == NULL || sequence->card() == 0)
        return;
    unsigned long count = sequence->card();
    facts->regions = static_cast<dcm_region *>(calloc(count, sizeof *facts->regions));
    if (facts->regions == NULL)
        throw std::bad_alloc();
    facts->region_count = count;
    for (unsigned long i = 0; i < count; i++) {
        DcmItem *item = sequence->getItem(i);
        dcm_region *region = &facts->regions[i];
        Uint16 data_type = 0;
        Uint32 value = 0;
        if (item == NULL)
            continue;
        if (item->findAndGetUint16(DCM_RegionDataType, data_type).good()) {
            region->has_region_data_type = 1;
            region->region_data_type = data_type;
        }
        if (item->findAndGetUint32(DCM_TransducerFrequency, value).good()) {
            region->has_transducer_frequency = 1;
            region->transducer_frequency_khz = value;
        }
        if (item->findAndGetUint32(DCM_PulseRepetitionFrequency, value).good()) {
            region->has_pulse_repetition_frequency = 1;
            region->pulse_repetition_frequency_hz = value;
        }
    }
}

static char *dcm_copy_ofstring(const OFString &text)
{
    return dcm_string_copy_length(text.c_str(), text.length());
}

static char *dcm_copy_term(const char *text) { return dcm_string_copy(text != NULL ? text : ""); }

static void dcm_sr_fill_item(DSRDocumentTree &tree, unsigned depth, dcm_sr_item *out)
{
    DSRContentItem &item = tree.getCurrentContentItem();
    OFString position;
    out->depth = depth;
    out->node_id = tree.getNodeID();
    out->position = dcm_copy_ofstring(tree.getPosition(position));
    out->value_type = dcm_copy_term(DSRTypes::valueTypeToDefinedTerm(item.getValueType()));
    out->relationship =
        item.getRelationshipType() == DSRTypes::RT_isRoot
            ? dcm_string_copy("")
            : dcm_copy_term(DSRTypes::relationshipTypeToDefinedTerm(item.getRelationshipType()));
    const DSRCodedEntryValue &concept_name = item.getConceptName();
    out->concept_scheme = dcm_copy_ofstring(concept_name.getCodingSchemeDesignator());
    out->concept_code = dcm_copy_ofstring(concept_name.getCodeValue());
    out->concept_meaning = dcm_copy_ofstring(concept_name.getCodeMeaning());
    const DSRNumericMeasurementValue *numeric = item.getNumericValuePtr();
    const DSRCodedEntryValue *unit = numeric != NULL ? &numeric->getMeasurementUnit() : NULL;
    out->numeric_value = dcm_copy_ofstring(numeric ? numeric->getNumericValue() : "");
    out->unit_scheme = dcm_copy_ofstring(unit ? unit->getCodingSchemeDesignator() : "");
    out->unit_code = dcm_copy_ofstring(unit ? unit->getCodeValue() : "");
    out->unit_meaning = dcm_copy_ofstring(unit ? unit->getCodeMeaning() : "");
    const DSRCodedEntryValue *code = item.getCodeValuePtr();
    out->code_scheme = dcm_copy_ofstring(code ? code->getCodingSchemeDesignator() : "");
    out->code_value = dcm_copy_ofstring(code ? code->getCodeValue() : "");
    out->code_meaning = dcm_copy_ofstring(code ? code->getCodeMeaning() : "");
    out->text_value = dcm_copy_ofstring(item.getStringValue());
}

static dcm_sr_item *dcm_sr_append(dcm_facts *facts, size_t *capacity)
{
    if (facts->sr_item_count == *capacity) {
        size_t grown = *capacity == 0 ? 16 : *capacity * 2;
        void *items = realloc(facts->sr_items, grown * sizeof *facts->sr_items);
        if (items == NULL)
            throw std::bad_alloc();
        facts->sr_items = static_cast<dcm_sr_item *>(items);
        *capacity = grown;
    }
    dcm_sr_item *item = &facts->sr_items[facts->sr_item_count++];
    memset(item, 0, sizeof *item);
    return item;
}

/* Depth-first pre-order; children of items at depth == limit are
 * skipped and flagged. Items are counted before they are filled so that
 * dcm_facts_free() cleans up a half-filled one. */
static void dcm_sr_walk(DSRDocumentTree &tree, unsigned depth_limit, dcm_facts *facts)
{
    size_t capacity = 0;
    if (tree.gotoRoot() == 0)
        return;
    for (;;) {
        unsigned depth = static_cast<unsigned>(tree.getLevel() - 1);
        dcm_sr_fill_item(tree, depth, dcm_sr_append(facts, &capacity));
        /* getNode() is protected: probe for children by going down. */
        if (tree.goDown() != 0) {
            if (depth < depth_limit)
                continue;
            tree.goUp();
            facts->sr_truncated = 1;
        }
        while (tree.gotoNext() == 0)
            if (tree.goUp() == 0)
                return;
    }
}

/* With input data correction off (dcm_initialise), UI values keep their
 * NUL padding and DSRDocument::read() rejects them as invalid ("violates
 * VR definition"): trim every UID of the private copy the SR is read
 * from. */
static void dcm_trim_uids(DcmDataset &dataset)
{
    DcmStack stack;
    while (dataset.nextObject(stack, OFTrue).good()) {
        DcmObject *object = stack.top();
        if (object->ident() != EVR_UI)
            continue;
        DcmElement *element = static_cast<DcmElement *>(object);
        OFString value;
        if (element->getOFStringArray(value, OFTrue).good())
            element->putOFStringArray(value);
    }
}

/* dataset is a private copy (it is modified). */
static void dcm_read_structured_report(DcmDataset &dataset, unsigned depth_limit,
                                       const char *sop_instance_uid, dcm_facts *facts)
{
    dcm_trim_uids(dataset);
    DSRDocument document;
    OFCondition condition = document.read(dataset, DSRTypes::RF_ignoreRelationshipConstraints |
                                                       DSRTypes::RF_acceptUnknownRelationshipType |
                                                       DSRTypes::RF_skipInvalidContentItems);
    if (condition.bad()) {
        log_warning("SR %s: content tree not readable, no SR items: %s", sop_instance_uid,
                    condition.text());
        return;
    }
    dcm_sr_walk(document.getTree(), depth_limit, facts);
}

/* 1 if the object's text is already UTF-8 when it is valid at all: no
 * Specific Character Set (the default repertoire, ASCII), "ISO_IR 6"
 * (read as ASCII) or "ISO_IR 192" (UTF-8). DCMTK's conversion of such an
 * object changes no valid value and fails on an invalid one, which then
 * stays as it was sent: reading the original gives the same values. */
static bool dcm_text_is_utf8_already(DcmDataset &dataset)
{
    OFString charset;
    if (dataset.findAndGetOFStringArray(DCM_SpecificCharacterSet, charset).bad())
        return true;
    size_t first = charset.find_first_not_of(' ');
    if (first == OFString_npos)
        return true;
    size_t last = charset.find_last_not_of(' ');
    OFString trimmed = charset.substr(first, last - first + 1);
    return trimmed == "ISO_IR 6" || trimmed == "ISO_IR 192";
}

/* A UTF-8 copy of the dataset, or NULL when none is needed (text already
 * UTF-8) or DCMTK cannot convert it (no converter built in, unknown or
 * broken character set). */
static DcmDataset *dcm_utf8_copy(DcmDataset &original, const char *sop_instance_uid)
{
    if (dcm_text_is_utf8_already(original) || !DcmSpecificCharacterSet::isConversionAvailable())
        return NULL;
    std::unique_ptr<DcmDataset> copy(new DcmDataset(original));
    OFCondition condition = copy->convertToUTF8();
    if (condition.bad()) {
        log_warning("object %s: character set not converted to UTF-8, "
                    "keeping the raw bytes: %s",
                    sop_instance_uid, condition.text());
        return NULL;
    }
    return copy.release();
}

static void dcm_read_transfer_syntax(DcmFileFormat &file, dcm_facts *facts)
{
    OFString uid;
    DcmMetaInfo *meta = file.getMetaInfo();
    if (meta != NULL && meta->findAndGetOFString(DCM_TransferSyntaxUID, uid).good() &&
        !uid.empty()) {
        facts->transfer_syntax_uid = dcm_copy_ofstring(uid);
        return;
    }
    E_TransferSyntax xfer = file.getDataset()->getOriginalXfer();
    if (xfer != EXS_Unknown)
        facts->transfer_syntax_uid = dcm_string_copy(DcmXfer(xfer).getXferID());
}

mitilog_status dcm_object_facts(dcm_object *object, unsigned sr_depth_limit, dcm_facts *facts,
                                mitilog_error *error)
{
    if (object == NULL || facts == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "dcm_object_facts: NULL argument");
    memset(facts, 0, sizeof *facts);
    try {
        DcmDataset &original = *object->file.getDataset();
        OFString sop_instance_uid, sop_class_uid;
        original.findAndGetOFString(DCM_SOPInstanceUID, sop_instance_uid);
        original.findAndGetOFString(DCM_SOPClassUID, sop_class_uid);

        std::unique_ptr<DcmDataset> utf8(dcm_utf8_copy(original, sop_instance_uid.c_str()));
        facts->character_set_converted = utf8 != NULL;
        DcmDataset &dataset = utf8 ? *utf8 : original;

        /* The character set as sent, not the ISO_IR 192 of the copy. */
        mitilog_status status =
            dcm_read_raw_values(dataset, DCM_ATTRIBUTE_SPECIFIC_CHARACTER_SET, facts, error);
        if (status == MITILOG_OK)
            status = dcm_read_raw_value(
                original, dcm_attribute_tags[DCM_ATTRIBUTE_SPECIFIC_CHARACTER_SET],
                &facts->values[DCM_ATTRIBUTE_SPECIFIC_CHARACTER_SET], error);
        if (status != MITILOG_OK) {
            dcm_facts_free(facts);
            return status;
        }
        dcm_read_transfer_syntax(object->file, facts);
        dcm_read_regions(dataset, facts);
        facts->is_structured_report =
            sop_class_uid.compare(0, sizeof dcm_sr_class_root - 1, dcm_sr_class_root) == 0;
        if (facts->is_structured_report) {
            if (!utf8)
                utf8.reset(new DcmDataset(original));
            dcm_read_structured_report(*utf8, sr_depth_limit, sop_instance_uid.c_str(), facts);
        }
        return MITILOG_OK;
    } catch (...) {
        dcm_facts_free(facts);
        return dcm_error_from_exception(error, MITILOG_ERROR_PARSE, "dcm_object_facts");
    }
}

static void dcm_sr_item_free(dcm_sr_item *item)
{
    char **strings[] = {
        &item->position,     &item->value_type,      &item->relationship,  &item->concept_scheme,
        &item->concept_code, &item->concept_meaning, &item->numeric_value, &item->unit_scheme,
        &item->unit_code,    &item->unit_meaning,    &item->code_scheme,   &item->code_value,
        &item->code_meaning, &item->text_value,
    };
    for (size_t i = 0; i < sizeof strings / sizeof strings[0]; i++) {
        free(*strings[i]);
        *strings[i] = NULL;
    }
}

void dcm_facts_free(dcm_facts *facts)
{
    if (facts == NULL)
        return;
    for (int a = 0; a < DCM_ATTRIBUTE_COUNT; a++)
        free(facts->values[a]);
    free(facts->transfer_syntax_uid);
    free(facts->regions);
    for (size_t i = 0; i < facts->sr_item_count; i++)
        dcm_sr_item_free(&facts->sr_items[i]);
    free(facts->sr_items);
    memset(facts, 0, sizeof *facts);
}

/* ------------------------------------------------------------------ */
/* Header copies                                                       */
/* ------------------------------------------------------------------ */

enum { DCM_BULK_LIMIT = 64 * 1024 };

/* Removes Pixel Data at the top level, and any non-sequence element over
 * 64 KiB at any depth (float pixel data, waveform data, ...). With
 * every_pixel_data, also each remaining Pixel Data (icons) at any depth. */
static void dcm_remove_bulk(DcmDataset &dataset, E_TransferSyntax xfer, bool every_pixel_data)
{
    DcmStack stack;
    OFList<DcmObject *> doomed;
    OFList<DcmItem *> parents;
    while (dataset.nextObject(stack, OFTrue).good()) {
        DcmObject *object = stack.top();
        DcmObject *parent = stack.card() > 1 ? stack.elem(1) : NULL;
        DcmEVR vr = object->ident();
        if (parent == NULL || vr == EVR_SQ || vr == EVR_item || vr == EVR_pixelSQ ||
            vr == EVR_pixelItem)
            continue;
        if (parent->ident() != EVR_dataset && parent->ident() != EVR_item)
            continue; /* fragments of an encapsulated pixel sequence */
        bool pixel_data = object->getTag() == DCM_PixelData;
        bool top_level = parent == &dataset;
        if ((pixel_data && (top_level || every_pixel_data)) ||
            object->getLength(xfer, EET_ExplicitLength) > DCM_BULK_LIMIT) {
            doomed.push_back(object);
            parents.push_back(static_cast<DcmItem *>(parent));
        }
    }
    OFListIterator(DcmObject *) object = doomed.begin();
    OFListIterator(DcmItem *) parent = parents.begin();
    for (; object != doomed.end(); ++object, ++parent)
        delete (*parent)->remove(*object);
}

/* An output stream into a growing std::string (DCMTK 3.6.7 has file and
 * fixed-buffer streams only), shaped like DcmOutputFileStream. */
class dcm_string_consumer : public DcmConsumer
{
  public:
    explicit dcm_string_consumer(std::string &out) : out_(out) {}
    OFBool good() const override { return OFTrue; }
    OFCondition status() const override { return EC_Normal; }
    OFBool isFlushed() const override { return OFTrue; }
    offile_off_t avail() const override { return OFstatic_cast(offile_off_t, 1) << 30; }
    offile_off_t write(const void *buffer, offile_off_t length) override
    {
        out_.append(static_cast<const char *>(buffer), static_cast<size_t>(length));
        return length;
    }
    void flush() override {}

  private:
    std::string &out_;
};

class dcm_string_stream : public DcmOutputStream
{
  public:
    explicit dcm_string_stream(std::string &out) : DcmOutputStream(&consumer_), consumer_(out) {}

  private:
    dcm_string_consumer consumer_;
};

/* 1 if the data set holds what the cut at Pixel Data would keep but a
 * header copy must not: an element over DCM_BULK_LIMIT at any depth
 * (float pixel data, waveform data...) or the group length of group
 * 7FE0, which would count pixels no longer there. */
static bool dcm_needs_rewrite(DcmDataset &dataset, E_TransferSyntax xfer)
{
    if (dataset.tagExists(DcmTagKey(0x7FE0, 0x0000)))
        return true;
    DcmStack stack;
    while (dataset.nextObject(stack, OFTrue).good()) {
        DcmObject *object = stack.top();
        DcmEVR vr = object->ident();
        if (vr == EVR_SQ || vr == EVR_item || vr == EVR_pixelSQ || vr == EVR_pixelItem)
            continue;
        if (object->getLength(xfer, EET_ExplicitLength) > DCM_BULK_LIMIT)
            return true;
    }
    return false;
}

/* The first size bytes of the file at path, malloc'd. */
static mitilog_status dcm_read_prefix(const std::string &path, uint64_t size, unsigned char **bytes,
                                      mitilog_error *error)
{
    FILE *file = fopen(path.c_str(), "rb");
    if (file == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_IO, "header copy: %s: %s", path.c_str(),
                                 strerror(errno));
    unsigned char *buffer = static_cast<unsigned char *>(malloc(size));
    size_t read = buffer != NULL ? fread(buffer, 1, size, file) : 0;
    fclose(file);
    if (buffer == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "header copy: out of memory");
    if (read != size) {
        free(buffer);
        return mitilog_error_set(error, MITILOG_ERROR_IO, "header copy: %s: short read",
                                 path.c_str());
    }
    *bytes = buffer;
    return MITILOG_OK;
}

mitilog_status dcm_object_header_bytes(dcm_object *object, unsigned char **bytes, size_t *size,
                                       mitilog_error *error)
{
    if (object == NULL || bytes == NULL || size == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "dcm_object_header_bytes: NULL argument");
    *bytes = NULL;
    *size = 0;
    try {
        DcmDataset &received = *object->file.getDataset();
        E_TransferSyntax received_xfer = received.getOriginalXfer();
        if (object->header_end > 0 && received_xfer != EXS_Unknown &&
            !dcm_needs_rewrite(received, received_xfer)) {
            mitilog_status status = dcm_read_prefix(object->path, object->header_end, bytes, error);
            if (status == MITILOG_OK)
                *size = static_cast<size_t>(object->header_end);
            return status;
        }
        /* From here the loaded object differs from the file's bytes. */
        object->header_end = 0;
        DcmFileFormat &file = object->file;
        DcmDataset &dataset = *file.getDataset();
        E_TransferSyntax original = dataset.getOriginalXfer();
        if (original == EXS_Unknown)
            original = EXS_LittleEndianExplicit;
        dcm_remove_bulk(dataset, original, false);
        E_TransferSyntax xfer = original;
        if (!dataset.canWriteXfer(xfer, original)) {
            /* e.g. an encapsulated icon left in a compressed object. */
            xfer = EXS_LittleEndianExplicit;
            if (!dataset.canWriteXfer(xfer, original))
                dcm_remove_bulk(dataset, original, true);
        }
        /* What saveFile() does before writing: a meta header that matches
         * the data set and the transfer syntax written. */
        OFCondition condition = file.validateMetaInfo(xfer, EWM_fileformat);
        std::string out;
        if (condition.good()) {
            dcm_string_stream stream(out);
            DcmWriteCache cache;
            file.transferInit();
            /* Without group lengths (retired in the data set, PS3.5
             * 7.2): recalculating them walked the data set once more. */
            condition = file.write(stream, xfer, EET_ExplicitLength, &cache, EGL_withoutGL,
                                   EPD_noChange, 0, 0, 0, EWM_fileformat);
            file.transferEnd();
            /* A deflated transfer syntax writes through a zlib filter that
             * keeps its tail until flushed (DcmOutputFileStream flushes in
             * its destructor). */
            for (int round = 0; condition.good() && !stream.isFlushed() && round < 16; round++)
                stream.flush();
            if (condition.good() && !stream.isFlushed())
                condition = EC_IllegalCall;
        }
        if (condition.bad())
            return dcm_error_from_condition(error, MITILOG_ERROR_IO, "header copy", condition);
        unsigned char *copy = static_cast<unsigned char *>(malloc(out.size()));
        if (copy == NULL)
            return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "header copy: out of memory");
        memcpy(copy, out.data(), out.size());
        *bytes = copy;
        *size = out.size();
        return MITILOG_OK;
    }
    DCM_CATCH_ALL(error, MITILOG_ERROR_IO, "dcm_object_header_bytes")
}
