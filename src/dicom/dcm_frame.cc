/*
 * dcm_frame.cc - one frame of an object's Pixel Data as 8-bit pixels.
 *
 * Native, RLE, JPEG (dcmjpeg) and JPEG-LS (dcmjpls) frames are decoded by
 * DCMTK's DicomImage with partial access, so that only the frame asked
 * for is decompressed (docs/dcmtk.md). JPEG 2000 is not in DCMTK: the
 * frame's fragments are taken from the encapsulated Pixel Data (PS3.5
 * section A.4) and decoded from memory by OpenJPEG.
 *
 * Every refusal is MITILOG_ERROR_INVALID with a reason in plain words;
 * no frame is ever guessed.
 */
#include "dicom/dcm_internal.h"

#include "dcmtk/dcmdata/dcdatset.h"
#include "dcmtk/dcmdata/dcdeftag.h"
#include "dcmtk/dcmdata/dcfilefo.h"
#include "dcmtk/dcmdata/dcpixel.h"
#include "dcmtk/dcmdata/dcpixseq.h"
#include "dcmtk/dcmdata/dcpxitem.h"
#include "dcmtk/dcmdata/dcrledrg.h"
#include "dcmtk/dcmdata/dcxfer.h"
#include "dcmtk/dcmimage/diregist.h" /* colour images in DicomImage */
#include "dcmtk/dcmimgle/dcmimage.h"
#include "dcmtk/dcmjpeg/djdecode.h"
#include "dcmtk/dcmjpls/djdecode.h"

#include <openjpeg.h>

#include <cstdlib>
#include <cstring>
#include <memory>
#include <new>
#include <string>
#include <vector>

namespace
{

/* Frames larger than this many pixels are refused: no ultrasound screen
 * comes near it, and a forged Rows x Columns must not ask for gigabytes. */
const unsigned long long FRAME_PIXELS_MAX = 64ull * 1024 * 1024;

const char ENHANCED_US_VOLUME[] = "1.2.840.10008.5.1.4.1.1.6.2";

unsigned char grey_of(unsigned red, unsigned green, unsigned blue)
{
    return static_cast<unsigned char>((299 * red + 587 * green + 114 * blue + 500) / 1000);
}

/* Allocates the frame's buffers (grey always, rgb when colour). */
mitilog_status frame_allocate(dcm_frame *frame, int width, int height, bool colour,
                              mitilog_error *error)
{
    size_t pixels = static_cast<size_t>(width) * static_cast<size_t>(height);
    frame->grey = static_cast<unsigned char *>(malloc(pixels));
    frame->rgb = colour ? static_cast<unsigned char *>(malloc(pixels * 3)) : NULL;
    if (frame->grey == NULL || (colour && frame->rgb == NULL)) {
        free(frame->grey);
        free(frame->rgb);
        frame->grey = frame->rgb = NULL;
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "frame of %dx%d: out of memory",
                                 width, height);
    }
    frame->width = width;
    frame->height = height;
    return MITILOG_OK;
}

void fill_grey_from_rgb(dcm_frame *frame)
{
    size_t pixels = static_cast<size_t>(frame->width) * static_cast<size_t>(frame->height);
    for (size_t i = 0; i < pixels; i++)
        frame->grey[i] = grey_of(frame->rgb[3 * i], frame->rgb[3 * i + 1], frame->rgb[3 * i + 2]);
}

/* ---- DCMTK's own decoders ------------------------------------------ */

mitilog_status frame_by_dicom_image(DcmDataset *dataset, E_TransferSyntax xfer, size_t index,
                                    dcm_frame *frame, mitilog_error *error)
{
    std::unique_ptr<DicomImage> image(new DicomImage(
        dataset, xfer, CIF_UsePartialAccessToPixelData | CIF_IgnoreModalityTransformation,
        static_cast<unsigned long>(index), 1));
    if (image->getStatus() != EIS_Normal)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "frame %zu does not decode (DCMTK: %s)", index + 1,
                                 DicomImage::getString(image->getStatus()));
    unsigned long width = image->getWidth(), height = image->getHeight();
    if (width == 0 || height == 0 || width * height > FRAME_PIXELS_MAX)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "frame of %lux%lu pixels: not read (empty or too large)", width,
                                 height);
    bool colour = !image->isMonochrome();
    mitilog_status status =
        frame_allocate(frame, static_cast<int>(width), static_cast<int>(height), colour, error);
    if (status != MITILOG_OK)
        return status;
    size_t pixels = static_cast<size_t>(width) * height;
    const void *output = image->getOutputData(8, 0, 0);
    if (output == NULL || image->getOutputDataSize(8) != pixels * (colour ? 3 : 1)) {
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "frame %zu does not decode (DCMTK: %s)", index + 1,
                                 DicomImage::getString(image->getStatus()));
    }
    if (colour) {
        memcpy(frame->rgb, output, pixels * 3);
        fill_grey_from_rgb(frame);
    } else {
        memcpy(frame->grey, output, pixels);
    }
    return MITILOG_OK;
}

/* ---- JPEG 2000 through OpenJPEG ------------------------------------ */

struct memory_source {
    const unsigned char *bytes;
    size_t size;
    size_t offset;
};

OPJ_SIZE_T memory_read(void *buffer, OPJ_SIZE_T count, void *user)
{
    memory_source *source = static_cast<memory_source *>(user);
    if (source->offset >= source->size)
        return static_cast<OPJ_SIZE_T>(-1);
    size_t left = source->size - source->offset;
    size_t taken = count < left ? count : left;
    memcpy(buffer, source->bytes + source->offset, taken);
    source->offset += taken;
    return taken;
}

OPJ_OFF_T memory_skip(OPJ_OFF_T count, void *user)
{
    memory_source *source = static_cast<memory_source *>(user);
    if (count < 0) {
        OPJ_OFF_T back = -count;
        if (static_cast<size_t>(back) > source->offset)
            back = static_cast<OPJ_OFF_T>(source->offset);
        source->offset -= static_cast<size_t>(back);
        return -back;
    }
    size_t left = source->size - source->offset;
    size_t taken = static_cast<size_t>(count) < left ? static_cast<size_t>(count) : left;
    source->offset += taken;
    return static_cast<OPJ_OFF_T>(taken);
}

OPJ_BOOL memory_seek(OPJ_OFF_T offset, void *user)
{
    memory_source *source = static_cast<memory_source *>(user);
    if (offset < 0 || static_cast<size_t>(offset) > source->size)
        return OPJ_FALSE;
    source->offset = static_cast<size_t>(offset);
    return OPJ_TRUE;
}

/* The JPEG processes of PS3.5 section 8.2.1 that dcmjpeg decodes. */
bool is_jpeg(E_TransferSyntax xfer)
{
    return (xfer >= EXS_JPEGProcess1 && xfer <= EXS_JPEGProcess29) || xfer == EXS_JPEGProcess14SV1;
}

void openjpeg_quiet(const char *, void *) {}

/* The bytes of frame index of an encapsulated Pixel Data (PS3.5 A.4):
 * by the Basic Offset Table when it has one entry per frame; otherwise
 * all fragments for a single frame, one fragment per frame when there are
 * as many as frames, else the fragments from each JPEG 2000 start of
 * codestream marker (FF 4F FF 51) to the next. */
mitilog_status frame_fragments(DcmPixelSequence *sequence, size_t index, size_t frame_count,
                               std::vector<unsigned char> &bytes, mitilog_error *error)
{
    unsigned long items = sequence->card();
    if (items < 2)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "encapsulated pixel data has no fragment");
    struct fragment {
        const Uint8 *data;
        Uint32 length;
        Uint32 offset; /* from the first fragment's item tag */
    };
    std::vector<fragment> fragments;
    Uint32 offset = 0;
    std::vector<Uint32> table;
    for (unsigned long i = 0; i < items; i++) {
        DcmPixelItem *item = NULL;
        if (sequence->getItem(item, i).bad() || item == NULL)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "encapsulated pixel data: fragment %lu unreadable", i);
        Uint8 *data = NULL;
        Uint32 length = item->getLength();
        if (length > 0 && (item->getUint8Array(data).bad() || data == NULL))
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "encapsulated pixel data: fragment %lu unreadable", i);
        if (i == 0) {
            for (Uint32 k = 0; k + 4 <= length; k += 4)
                table.push_back(static_cast<Uint32>(data[k]) |
                                static_cast<Uint32>(data[k + 1]) << 8 |
                                static_cast<Uint32>(data[k + 2]) << 16 |
                                static_cast<Uint32>(data[k + 3]) << 24);
            continue;
        }
        fragments.push_back({data, length, offset});
        offset += 8 + length;
    }
    size_t first = fragments.size(), last = fragments.size();
    if (table.size() == frame_count && index < table.size()) {
        for (size_t i = 0; i < fragments.size(); i++) {
            if (fragments[i].offset == table[index])
                first = i;
            if (index + 1 < table.size() && fragments[i].offset == table[index + 1])
                last = i;
        }
    } else if (frame_count == 1) {
        first = 0;
    } else if (fragments.size() == frame_count) {
        first = index;
        last = index + 1;
    } else {
        size_t seen = 0;
        for (size_t i = 0; i < fragments.size(); i++) {
            const fragment &f = fragments[i];
            bool starts = f.length >= 4 && f.data[0] == 0xFF && f.data[1] == 0x4F &&
                          f.data[2] == 0xFF && f.data[3] == 0x51;
            if (!starts)
                continue;
            if (seen == index)
                first = i;
            else if (seen == index + 1) {
                last = i;
                break;
            }
            seen++;
        }
    }
    if (first >= fragments.size() || last <= first)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "frame %zu: its fragments cannot be found in the "
                                 "encapsulated pixel data",
                                 index + 1);
    for (size_t i = first; i < last; i++)
        bytes.insert(bytes.end(), fragments[i].data, fragments[i].data + fragments[i].length);
    return MITILOG_OK;
}

/* A check of an RLE frame before DCMTK decodes it (PS3.5 section G.3):
 * DCMTK's decoder fills what a short segment leaves out with whatever the
 * buffer held, so a frame cut short must be refused here. Each of the
 * header's segments must unpack (PackBits, G.3.1) to exactly
 * rows x columns bytes. */
mitilog_status rle_frame_complete(DcmDataset *dataset, size_t index, size_t frame_count,
                                  mitilog_error *error)
{
    DcmElement *element = NULL;
    if (dataset->findAndGetElement(DCM_PixelData, element).bad() || element == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no pixel data");
    DcmPixelSequence *sequence = NULL;
    if (static_cast<DcmPixelData *>(element)
            ->getEncapsulatedRepresentation(EXS_RLELossless, NULL, sequence)
            .bad() ||
        sequence == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "RLE transfer syntax but the pixel data is not encapsulated");
    std::vector<unsigned char> bytes;
    mitilog_status status = frame_fragments(sequence, index, frame_count, bytes, error);
    if (status != MITILOG_OK)
        return status;
    Uint16 rows = 0, columns = 0, samples = 1, allocated = 8;
    dataset->findAndGetUint16(DCM_Rows, rows);
    dataset->findAndGetUint16(DCM_Columns, columns);
    dataset->findAndGetUint16(DCM_SamplesPerPixel, samples);
    dataset->findAndGetUint16(DCM_BitsAllocated, allocated);
    auto word = [&bytes](size_t at) {
        return static_cast<Uint32>(bytes[at]) | static_cast<Uint32>(bytes[at + 1]) << 8 |
               static_cast<Uint32>(bytes[at + 2]) << 16 | static_cast<Uint32>(bytes[at + 3]) << 24;
    };
    size_t expected_segments = static_cast<size_t>(samples) * ((allocated + 7) / 8);
    if (bytes.size() < 64 || word(0) != expected_segments || expected_segments > 15)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "frame %zu does not decode: its RLE header is not the one of "
                                 "%zu segment(s) (PS3.5 G.5)",
                                 index + 1, expected_segments);
    size_t wanted = static_cast<size_t>(rows) * columns;
    for (size_t segment = 0; segment < expected_segments; segment++) {
        size_t at = word(4 + 4 * segment);
        size_t end = segment + 1 < expected_segments ? word(8 + 4 * segment) : bytes.size();
        if (at < 64 || end > bytes.size() || at > end)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "frame %zu does not decode: RLE segment %zu lies outside "
                                     "its fragment",
                                     index + 1, segment + 1);
        size_t produced = 0;
        while (at < end && produced < wanted) {
            signed char header = static_cast<signed char>(bytes[at++]);
            if (header >= 0) {
                size_t literal = static_cast<size_t>(header) + 1;
                if (at + literal > end)
                    break;
                at += literal;
                produced += literal;
            } else if (header != -128) {
                if (at >= end)
                    break;
                at++;
                produced += static_cast<size_t>(1 - header);
            }
        }
        if (produced < wanted)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "frame %zu does not decode: its RLE data ends early "
                                     "(segment %zu gives %zu of %zu bytes)",
                                     index + 1, segment + 1, produced, wanted);
    }
    return MITILOG_OK;
}

unsigned char scale_sample(OPJ_INT32 value, const opj_image_comp_t &component)
{
    long long sample = value;
    long long maximum = (1ll << component.prec) - 1;
    if (component.sgnd)
        sample += 1ll << (component.prec - 1);
    if (sample < 0)
        sample = 0;
    if (sample > maximum)
        sample = maximum;
    if (component.prec == 8)
        return static_cast<unsigned char>(sample);
    return static_cast<unsigned char>((sample * 255 + maximum / 2) / maximum);
}

mitilog_status frame_by_openjpeg(DcmDataset *dataset, E_TransferSyntax xfer, size_t index,
                                 size_t frame_count, bool monochrome1, dcm_frame *frame,
                                 mitilog_error *error)
{
    DcmElement *element = NULL;
    if (dataset->findAndGetElement(DCM_PixelData, element).bad() || element == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "no pixel data");
    DcmPixelData *pixel_data = static_cast<DcmPixelData *>(element);
    DcmPixelSequence *sequence = NULL;
    if (pixel_data->getEncapsulatedRepresentation(xfer, NULL, sequence).bad() || sequence == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "JPEG 2000 transfer syntax but the pixel data is not "
                                 "encapsulated");
    std::vector<unsigned char> bytes;
    mitilog_status status = frame_fragments(sequence, index, frame_count, bytes, error);
    if (status != MITILOG_OK)
        return status;
    memory_source source = {bytes.data(), bytes.size(), 0};
    bool jp2 = bytes.size() >= 12 && bytes[4] == 'j' && bytes[5] == 'P' && bytes[6] == ' ';
    opj_codec_t *codec = opj_create_decompress(jp2 ? OPJ_CODEC_JP2 : OPJ_CODEC_J2K);
    opj_stream_t *stream = opj_stream_create(64 * 1024, OPJ_TRUE);
    opj_image_t *image = NULL;
    if (codec == NULL || stream == NULL) {
        if (codec != NULL)
            opj_destroy_codec(codec);
        if (stream != NULL)
            opj_stream_destroy(stream);
        return mitilog_error_set(error, MITILOG_ERROR_MEMORY, "JPEG 2000 decoder: out of memory");
    }
    opj_set_info_handler(codec, openjpeg_quiet, NULL);
    opj_set_warning_handler(codec, openjpeg_quiet, NULL);
    opj_set_error_handler(codec, openjpeg_quiet, NULL);
    opj_stream_set_user_data(stream, &source, NULL);
    opj_stream_set_user_data_length(stream, bytes.size());
    opj_stream_set_read_function(stream, memory_read);
    opj_stream_set_skip_function(stream, memory_skip);
    opj_stream_set_seek_function(stream, memory_seek);
    opj_dparameters_t parameters;
    opj_set_default_decoder_parameters(&parameters);
    bool decoded = opj_setup_decoder(codec, &parameters) &&
                   opj_read_header(stream, codec, &image) && image != NULL &&
                   opj_decode(codec, stream, image) && opj_end_decompress(codec, stream);
    opj_stream_destroy(stream);
    opj_destroy_codec(codec);
    if (!decoded) {
        opj_image_destroy(image);
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "frame %zu does not decode: the JPEG 2000 codestream is "
                                 "damaged or incomplete",
                                 index + 1);
    }
    std::unique_ptr<opj_image_t, void (*)(opj_image_t *)> owned(image, opj_image_destroy);
    unsigned components = image->numcomps;
    if (components != 1 && components != 3)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "JPEG 2000 frame with %u components: only grey (1) or colour "
                                 "(3) are read",
                                 components);
    const opj_image_comp_t &reference = image->comps[0];
    for (unsigned c = 0; c < components; c++) {
        const opj_image_comp_t &component = image->comps[c];
        if (component.data == NULL || component.dx != 1 || component.dy != 1 ||
            component.w != reference.w || component.h != reference.h || component.prec < 1 ||
            component.prec > 16)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "JPEG 2000 frame with subsampled or uneven components: "
                                     "not read");
    }
    unsigned long long pixels_wanted = static_cast<unsigned long long>(reference.w) * reference.h;
    if (reference.w == 0 || reference.h == 0 || pixels_wanted > FRAME_PIXELS_MAX)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "frame of %ux%u pixels: not read (empty or too large)",
                                 reference.w, reference.h);
    Uint16 rows = 0, columns = 0;
    dataset->findAndGetUint16(DCM_Rows, rows);
    dataset->findAndGetUint16(DCM_Columns, columns);
    if (rows != reference.h || columns != reference.w)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                 "JPEG 2000 frame of %ux%u but the header says %ux%u: not read",
                                 reference.w, reference.h, columns, rows);
    status = frame_allocate(frame, static_cast<int>(reference.w), static_cast<int>(reference.h),
                            components == 3, error);
    if (status != MITILOG_OK)
        return status;
    size_t pixels = static_cast<size_t>(pixels_wanted);
    if (components == 3) {
        for (size_t i = 0; i < pixels; i++)
            for (unsigned c = 0; c < 3; c++)
                frame->rgb[3 * i + c] = scale_sample(image->comps[c].data[i], image->comps[c]);
        fill_grey_from_rgb(frame);
    } else {
        for (size_t i = 0; i < pixels; i++) {
            unsigned char grey = scale_sample(reference.data[i], reference);
            frame->grey[i] = monochrome1 ? static_cast<unsigned char>(255 - grey) : grey;
        }
    }
    return MITILOG_OK;
}

} // namespace

namespace
{

/* At exit, after every thread that decoded has been joined: DCMTK keeps
 * the registered codecs until they are cleaned up. */
void dcm_frame_codecs_cleanup()
{
    DJLSDecoderRegistration::cleanup();
    DJDecoderRegistration::cleanup();
    DcmRLEDecoderRegistration::cleanup();
}

} // namespace

void dcm_frame_codecs_register(void)
{
    static bool registered = false;
    if (registered)
        return;
    registered = true;
    DcmRLEDecoderRegistration::registerCodecs();
    DJDecoderRegistration::registerCodecs();
    DJLSDecoderRegistration::registerCodecs();
    std::atexit(dcm_frame_codecs_cleanup);
}

mitilog_status dcm_object_frame(dcm_object *object, size_t index, dcm_frame *frame,
                                mitilog_error *error)
{
    if (frame == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "dcm_object_frame: no frame");
    memset(frame, 0, sizeof *frame);
    DcmFileFormat *file = dcm_object_file(object);
    if (file == NULL || file->getDataset() == NULL)
        return mitilog_error_set(error, MITILOG_ERROR_INVALID, "dcm_object_frame: no object");
    try {
        DcmDataset *dataset = file->getDataset();
        OFString sop_class;
        if (dataset->findAndGetOFString(DCM_SOPClassUID, sop_class).good() &&
            sop_class == ENHANCED_US_VOLUME)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "an Enhanced US Volume: its frames are not screens, "
                                     "not read");
        if (!dataset->tagExists(DCM_PixelData))
            return mitilog_error_set(error, MITILOG_ERROR_INVALID, "the object has no pixel data");
        long frames = 1;
        OFString frames_text;
        if (dataset->findAndGetOFString(DCM_NumberOfFrames, frames_text).good() &&
            !frames_text.empty()) {
            char *end = NULL;
            frames = strtol(frames_text.c_str(), &end, 10);
            while (end != NULL && *end == ' ')
                end++;
            if (end == NULL || *end != '\0' || frames < 1)
                return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                         "Number of Frames '%s' is not a positive number: "
                                         "frames not read",
                                         frames_text.c_str());
        }
        frame->frame_count = static_cast<size_t>(frames);
        if (index >= frame->frame_count)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "frame %zu asked for but the object has %zu", index + 1,
                                     frame->frame_count);
        Uint16 rows = 0, columns = 0;
        dataset->findAndGetUint16(DCM_Rows, rows);
        dataset->findAndGetUint16(DCM_Columns, columns);
        if (static_cast<unsigned long long>(rows) * columns > FRAME_PIXELS_MAX || rows == 0 ||
            columns == 0)
            return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                     "frame of %ux%u pixels: not read (empty or too large)",
                                     columns, rows);
        OFString photometric;
        dataset->findAndGetOFString(DCM_PhotometricInterpretation, photometric);
        E_TransferSyntax xfer = dataset->getOriginalXfer();
        mitilog_status status;
        if (xfer == EXS_JPEG2000LosslessOnly || xfer == EXS_JPEG2000 ||
            xfer == EXS_JPEG2000MulticomponentLosslessOnly || xfer == EXS_JPEG2000Multicomponent) {
            status = frame_by_openjpeg(dataset, xfer, index, frame->frame_count,
                                       photometric == "MONOCHROME1", frame, error);
        } else {
            DcmXfer transfer(xfer);
            if (transfer.isEncapsulated() && xfer != EXS_RLELossless && !is_jpeg(xfer) &&
                xfer != EXS_JPEGLSLossless && xfer != EXS_JPEGLSLossy)
                return mitilog_error_set(error, MITILOG_ERROR_INVALID,
                                         "transfer syntax %s: its frames are not decoded here "
                                         "(video and other codecs are not read)",
                                         transfer.getXferName());
            status = xfer == EXS_RLELossless
                         ? rle_frame_complete(dataset, index, frame->frame_count, error)
                         : MITILOG_OK;
            if (status == MITILOG_OK)
                status = frame_by_dicom_image(dataset, xfer, index, frame, error);
        }
        if (status != MITILOG_OK)
            dcm_frame_free(frame);
        return status;
    } catch (...) {
        dcm_frame_free(frame);
        return dcm_error_from_exception(error, MITILOG_ERROR_INVALID, "frame");
    }
}

void dcm_frame_free(dcm_frame *frame)
{
    if (frame == NULL)
        return;
    free(frame->grey);
    free(frame->rgb);
    frame->grey = frame->rgb = NULL;
}
