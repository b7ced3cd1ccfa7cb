/* mitilog device learn|show|list|activate|retire|bench: setting up the
 * screen profiles of devices that burn the indices into the pixels
 * (docs/screen-reading.md).
 *
 *   learn --key KEY --value FILE:MI=1.2,TIS=0.4 ... FILE...
 *         learns a profile from labelled frames and stores it as proposed
 *         (--print: print it instead, no database)
 *   show KEY          the profile (active, else newest) and its report
 *   list              every profile version as JSON
 *   activate KEY [--version N] [--by NAME]
 *   retire KEY
 *   bench MANIFEST    learn and read the frames a manifest names, printing
 *                     each reading and the CPU time of reading per frame
 *                     (bench/screen.py)
 *
 * Frames are DICOM images (the first frame, decoded by the shim; the
 * indices in the header are its values) or binary PGM files (P5, 8-bit
 * grey), which DCMTK's dcmj2pnm writes
 * ("dcmj2pnm --write-8-bit-pnm --frame N"). */
#include <ctype.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>

#include "cli/cli_options.h"
#include "cli/commands.h"
#include "dicom/dcm.h"
#include "extract/ext.h"
#include "screen/screen.h"
#include "store/store.h"
#include "store/store_devices.h"

enum { DEVICE_FRAMES_MAX = 64, DEVICE_REPORT_SIZE = 4096 };

typedef struct device_frame {
    char *path;
    unsigned char *file; /* the frame as a PGM file, kept for the database */
    size_t file_size;
    screen_example example; /* image.grey points into file */
    int from_header;        /* a DICOM file: truth holds its header values */
    char *manufacturer, *model_name, *software_versions; /* DICOM only */
} device_frame;

static void frame_free(device_frame *frame)
{
    free(frame->path);
    free(frame->file);
    free(frame->manufacturer);
    free(frame->model_name);
    free(frame->software_versions);
    memset(frame, 0, sizeof *frame);
}

static char *copy_or_null(const char *text) { return text != NULL ? strdup(text) : NULL; }

/* The first frame of a DICOM image, decoded by the shim, as a PGM file in
 * frame; the indices its header holds become the frame's truth. */
static int frame_load_dicom(const char *path, device_frame *frame, char *why, size_t why_size)
{
    dcm_object *object = NULL;
    dcm_facts facts;
    dcm_frame pixels;
    mitilog_error error = {{0}};
    memset(&facts, 0, sizeof facts);
    memset(&pixels, 0, sizeof pixels);
    int result = -1;
    if (dcm_object_load(path, &object, &error) != MITILOG_OK ||
        dcm_object_facts(object, 0, &facts, &error) != MITILOG_OK ||
        dcm_object_frame(object, 0, &pixels, &error) != MITILOG_OK) {
        snprintf(why, why_size,
                 "%s is neither an 8-bit binary PGM file nor a DICOM image "
                 "whose first frame decodes: %.300s",
                 path, error.text);
        goto done;
    }
    char header[64];
    int header_length =
        snprintf(header, sizeof header, "P5\n%d %d\n255\n", pixels.width, pixels.height);
    size_t size = (size_t)header_length + (size_t)pixels.width * (size_t)pixels.height;
    frame->file = malloc(size);
    frame->path = strdup(path);
    if (frame->file == NULL || frame->path == NULL) {
        snprintf(why, why_size, "out of memory reading %s", path);
        goto done;
    }
    memcpy(frame->file, header, (size_t)header_length);
    memcpy(frame->file + header_length, pixels.grey, (size_t)pixels.width * (size_t)pixels.height);
    frame->file_size = size;
    frame->example.image = (screen_image){.width = pixels.width,
                                          .height = pixels.height,
                                          .stride = (size_t)pixels.width,
                                          .grey = frame->file + header_length};
    frame->from_header = 1;
    frame->manufacturer = copy_or_null(facts.values[DCM_ATTRIBUTE_MANUFACTURER]);
    frame->model_name = copy_or_null(facts.values[DCM_ATTRIBUTE_MANUFACTURER_MODEL_NAME]);
    frame->software_versions = copy_or_null(facts.values[DCM_ATTRIBUTE_SOFTWARE_VERSIONS]);
    static const int attributes[EXAM_INDEX_COUNT] = {
        DCM_ATTRIBUTE_MECHANICAL_INDEX,
        DCM_ATTRIBUTE_SOFT_TISSUE_THERMAL_INDEX,
        DCM_ATTRIBUTE_BONE_THERMAL_INDEX,
        DCM_ATTRIBUTE_CRANIAL_THERMAL_INDEX,
        DCM_ATTRIBUTE_SOFT_TISSUE_FOCUS_THERMAL_INDEX,
        DCM_ATTRIBUTE_SOFT_TISSUE_SURFACE_THERMAL_INDEX};
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        exam_number number = ext_parse_decimal_string(facts.values[attributes[i]]);
        if (number.status == EXAM_VALUE_OK && number.value >= 0.0 && number.value < 100.0) {
            /* The header's value, shown on the screen with one or two
             * decimals: learning tries both. */
            frame->example.truth[i].status = SCREEN_VALUE_READ;
            frame->example.truth[i].value = number.value;
        }
    }
    result = 0;
done:
    dcm_frame_free(&pixels);
    dcm_facts_free(&facts);
    dcm_object_free(object);
    if (result != 0) {
        free(frame->file);
        free(frame->path);
        frame->file = NULL;
        frame->path = NULL;
    }
    return result;
}

/* Skips whitespace and # comments of a PGM header. */
static size_t pgm_skip(const unsigned char *data, size_t size, size_t at)
{
    while (at < size) {
        if (data[at] == '#') {
            while (at < size && data[at] != '\n')
                at++;
        } else if (isspace(data[at])) {
            at++;
        } else {
            break;
        }
    }
    return at;
}

static size_t pgm_number(const unsigned char *data, size_t size, size_t at, long *value)
{
    at = pgm_skip(data, size, at);
    *value = -1;
    long number = 0;
    size_t start = at;
    while (at < size && isdigit(data[at]) && number < 100000)
        number = number * 10 + (data[at++] - '0');
    if (at > start)
        *value = number;
    return at;
}

/* Reads a binary PGM (P5, maxval 255) into frame. */
static int frame_load(const char *path, device_frame *frame, char *why, size_t why_size)
{
    memset(frame, 0, sizeof *frame);
    FILE *in = fopen(path, "rb");
    if (in == NULL) {
        snprintf(why, why_size, "cannot open %s", path);
        return -1;
    }
    size_t capacity = 1 << 20, size = 0;
    unsigned char *data = malloc(capacity);
    while (data != NULL) {
        size += fread(data + size, 1, capacity - size, in);
        if (size < capacity)
            break;
        unsigned char *bigger = capacity < (64u << 20) ? realloc(data, capacity * 2) : NULL;
        if (bigger == NULL) {
            free(data);
            data = NULL;
            break;
        }
        data = bigger;
        capacity *= 2;
    }
    fclose(in);
    if (data == NULL) {
        snprintf(why, why_size, "%s is too large or memory ran out", path);
        return -1;
    }
    long width = -1, height = -1, maximum = -1;
    size_t at = 2;
    if (size < 2 || data[0] != 'P' || data[1] != '5') {
        free(data);
        return frame_load_dicom(path, frame, why, why_size);
    }
    {
        at = pgm_number(data, size, at, &width);
        at = pgm_number(data, size, at, &height);
        at = pgm_number(data, size, at, &maximum);
        at++; /* the one whitespace character before the pixels */
    }
    if (width <= 0 || height <= 0 || maximum != 255 || at + (size_t)width * (size_t)height > size) {
        free(data);
        snprintf(why, why_size, "%s is not an 8-bit binary PGM file (P5, maximum 255)", path);
        return -1;
    }
    frame->path = strdup(path);
    frame->file = data;
    frame->file_size = size;
    frame->example.image = (screen_image){
        .width = (int)width, .height = (int)height, .stride = (size_t)width, .grey = data + at};
    return frame->path != NULL ? 0 : -1;
}

static int index_by_label(const char *label)
{
    static const char *const names[EXAM_INDEX_COUNT] = {"MI", "TIS", "TIB", "TIC", "TISF", "TISS"};
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        if (strcasecmp(label, names[i]) == 0)
            return i;
    }
    return -1;
}

/* Parses "MI=1.2,TIS=0.4" into truth (the text kept as typed). */
static int parse_values(const char *text, screen_value truth[EXAM_INDEX_COUNT], char *why,
                        size_t why_size)
{
    char *copy = strdup(text);
    if (copy == NULL)
        return -1;
    int result = 0;
    char *save = NULL;
    for (char *item = strtok_r(copy, ",", &save); item != NULL && result == 0;
         item = strtok_r(NULL, ",", &save)) {
        char *equals = strchr(item, '=');
        int index = -1;
        if (equals != NULL) {
            *equals = '\0';
            index = index_by_label(item);
        }
        char *end = NULL;
        double value = equals != NULL ? strtod(equals + 1, &end) : 0.0;
        if (index < 0 || end == equals + 1 || *end != '\0' || value < 0.0 || value > 99.0 ||
            strchr(equals + 1, '.') == NULL || strlen(equals + 1) >= sizeof truth[0].text) {
            snprintf(why, why_size,
                     "'%s' is not INDEX=VALUE as drawn (MI, TIS, TIB, TIC, TISF, TISS; "
                     "e.g. MI=1.2 or TIB=0.45)",
                     item);
            result = -1;
            break;
        }
        truth[index].status = SCREEN_VALUE_READ;
        truth[index].value = value;
        snprintf(truth[index].text, sizeof truth[index].text, "%s", equals + 1);
    }
    free(copy);
    return result;
}

static void print_reading(FILE *out, const char *path, const screen_reading *reading)
{
    fprintf(out, "read %s", path);
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        const screen_value *v = &reading->values[i];
        if (v->status == SCREEN_VALUE_READ)
            fprintf(out, " %s=%s", exam_index_name((exam_index)i), v->text);
        else if (v->status == SCREEN_VALUE_NOT_READ)
            fprintf(out, " %s=-", exam_index_name((exam_index)i));
    }
    fputc('\n', out);
    for (int i = 0; i < EXAM_INDEX_COUNT; i++) {
        const screen_value *v = &reading->values[i];
        if (v->status == SCREEN_VALUE_NOT_READ)
            fprintf(out, "  %s not read: %s\n", exam_index_name((exam_index)i), v->reason);
    }
}

static double cpu_seconds(void)
{
    struct rusage usage;
    getrusage(RUSAGE_SELF, &usage);
    return (double)usage.ru_utime.tv_sec + (double)usage.ru_utime.tv_usec / 1e6 +
           (double)usage.ru_stime.tv_sec + (double)usage.ru_stime.tv_usec / 1e6;
}

/* bench MANIFEST: lines "learn KEY FILE VALUES" and "read KEY FILE ...";
 * a key's profile is learned at its first read line. */
static int device_bench(const char *manifest)
{
    FILE *in = fopen(manifest, "r");
    if (in == NULL) {
        fprintf(stderr, "mitilog device bench: cannot open %s\n", manifest);
        return EXIT_STATUS_USAGE;
    }
    char line[4096], current[SCREEN_KEY_SIZE] = "";
    device_frame frames[DEVICE_FRAMES_MAX];
    size_t frame_count = 0;
    screen_profile *profile = NULL;
    int learned = 0;
    double reading_seconds = 0.0;
    unsigned long reads = 0;
    int exit_status = EXIT_STATUS_SUCCESS;
    while (fgets(line, sizeof line, in) != NULL) {
        char verb[16], key[SCREEN_KEY_SIZE], path[2048], values[1024] = "";
        if (sscanf(line, "%15s %127s %2047s %1023s", verb, key, path, values) < 3)
            continue;
        if (strcmp(key, current) != 0) {
            screen_profile_free(profile);
            profile = NULL;
            learned = 0;
            for (size_t f = 0; f < frame_count; f++)
                frame_free(&frames[f]);
            frame_count = 0;
            snprintf(current, sizeof current, "%s", key);
        }
        char why[512];
        if (strcmp(verb, "learn") == 0 && frame_count < DEVICE_FRAMES_MAX) {
            if (frame_load(path, &frames[frame_count], why, sizeof why) != 0 ||
                parse_values(values, frames[frame_count].example.truth, why, sizeof why) != 0) {
                fprintf(stderr, "mitilog device bench: %s\n", why);
                exit_status = EXIT_STATUS_FAILURE;
                continue;
            }
            frame_count++;
            continue;
        }
        if (strcmp(verb, "read") != 0)
            continue;
        if (!learned) {
            learned = 1;
            screen_example examples[DEVICE_FRAMES_MAX];
            for (size_t f = 0; f < frame_count; f++)
                examples[f] = frames[f].example;
            char report[DEVICE_REPORT_SIZE];
            mitilog_error error;
            double before = cpu_seconds();
            if (screen_learn(NULL, key, examples, frame_count, &profile, report, sizeof report,
                             &error) != MITILOG_OK) {
                printf("learned %s refused: %s\n", key, error.text);
                printf("%s", report);
            } else {
                printf("learned %s ok in %.1f ms\n", key, (cpu_seconds() - before) * 1e3);
            }
        }
        device_frame frame;
        if (frame_load(path, &frame, why, sizeof why) != 0) {
            fprintf(stderr, "mitilog device bench: %s\n", why);
            exit_status = EXIT_STATUS_FAILURE;
            continue;
        }
        if (profile == NULL) {
            printf("read %s no-profile\n", path);
        } else {
            screen_reading reading;
            mitilog_error error;
            double before = cpu_seconds();
            screen_read(profile, &frame.example.image, &reading, &error);
            reading_seconds += cpu_seconds() - before;
            reads++;
            print_reading(stdout, path, &reading);
        }
        frame_free(&frame);
    }
    fclose(in);
    screen_profile_free(profile);
    for (size_t f = 0; f < frame_count; f++)
        frame_free(&frames[f]);
    printf("frames_read %lu cpu_ms_per_frame %.3f\n", reads,
           reads ? reading_seconds * 1e3 / (double)reads : 0.0);
    return exit_status;
}

static int device_usage(FILE *out)
{
    fprintf(out, "usage: mitilog device learn [--config FILE] --key KEY [--print]\n"
                 "                            [--manufacturer M] [--model M] [--software S]\n"
                 "                            [--value FILE:MI=1.2,TIS=0.4 ...] FILE...\n"
                 "       mitilog device show [--config FILE] KEY\n"
                 "       mitilog device list [--config FILE]\n"
                 "       mitilog device activate [--config FILE] [--version N] [--by NAME] KEY\n"
                 "       mitilog device retire [--config FILE] KEY\n"
                 "       mitilog device bench MANIFEST\n"
                 "Sets up the screen profiles of devices that draw the indices into the image\n"
                 "(docs/screen-reading.md). A FILE is a DICOM image (its first frame; the\n"
                 "indices in its header are its values and its Manufacturer, Model Name and\n"
                 "Software Versions name the device) or an 8-bit binary PGM file. --value\n"
                 "gives the values a frame's screen shows (replacing its header's). learn\n"
                 "needs every digit and the point among the values; the profile it stores is\n"
                 "'proposed' until activated.\n");
    return out == stdout ? EXIT_STATUS_SUCCESS : EXIT_STATUS_USAGE;
}

static int device_learn(int argc, char **argv, store **st_out, const char *config_path)
{
    const char *key = NULL, *manufacturer = NULL, *model_name = NULL, *software_versions = NULL;
    int print_only = 0;
    device_frame frames[DEVICE_FRAMES_MAX];
    const char *values_for[DEVICE_FRAMES_MAX] = {0};
    char *value_options[DEVICE_FRAMES_MAX];
    size_t value_count = 0, frame_count = 0;
    int exit_status = EXIT_STATUS_USAGE;
    for (int i = 2; i < argc; i++) {
        if (strcmp(argv[i], "--key") == 0 && i + 1 < argc)
            key = argv[++i];
        else if (strcmp(argv[i], "--print") == 0)
            print_only = 1;
        else if (strcmp(argv[i], "--manufacturer") == 0 && i + 1 < argc)
            manufacturer = argv[++i];
        else if (strcmp(argv[i], "--model") == 0 && i + 1 < argc)
            model_name = argv[++i];
        else if (strcmp(argv[i], "--software") == 0 && i + 1 < argc)
            software_versions = argv[++i];
        else if (strcmp(argv[i], "--config") == 0 && i + 1 < argc)
            i++;
        else if (strcmp(argv[i], "--value") == 0 && i + 1 < argc && value_count < DEVICE_FRAMES_MAX)
            value_options[value_count++] = argv[++i];
        else if (argv[i][0] != '-' && frame_count < DEVICE_FRAMES_MAX) {
            char why[512];
            if (frame_load(argv[i], &frames[frame_count], why, sizeof why) != 0) {
                fprintf(stderr, "mitilog device learn: %s\n", why);
                goto done;
            }
            frame_count++;
        } else {
            device_usage(stderr);
            goto done;
        }
    }
    if (key == NULL || frame_count == 0) {
        fprintf(stderr, "mitilog device learn: give --key KEY and at least one frame\n");
        goto done;
    }
    for (size_t v = 0; v < value_count; v++) {
        char *colon = strrchr(value_options[v], ':');
        size_t f = 0;
        if (colon != NULL) {
            *colon = '\0';
            for (; f < frame_count && strcmp(frames[f].path, value_options[v]) != 0; f++)
                ;
        }
        char why[512] = "";
        if (colon != NULL && f < frame_count) /* typed values replace the header's */
            memset(frames[f].example.truth, 0, sizeof frames[f].example.truth);
        if (colon == NULL || f == frame_count ||
            parse_values(colon + 1, frames[f].example.truth, why, sizeof why) != 0) {
            fprintf(stderr, "mitilog device learn: --value %s: %s\n", value_options[v],
                    why[0] ? why : "give FILE:MI=1.2,... for a FILE also named as a frame");
            goto done;
        }
        values_for[f] = colon + 1;
    }
    screen_device device = {.manufacturer = manufacturer,
                            .model_name = model_name,
                            .software_versions = software_versions};
    for (size_t f = 0; f < frame_count; f++) {
        int header_values = 0;
        for (int i = 0; i < EXAM_INDEX_COUNT; i++)
            header_values |= frames[f].example.truth[i].status == SCREEN_VALUE_READ;
        if (values_for[f] == NULL && !(frames[f].from_header && header_values)) {
            fprintf(stderr,
                    "mitilog device learn: no values for %s%s: give --value "
                    "%s:MI=1.2,TIS=0.4 as its screen shows them\n",
                    frames[f].path, frames[f].from_header ? " (its header has none)" : "",
                    frames[f].path);
            goto done;
        }
        /* The device as its DICOM files name it, unless given. */
        if (frames[f].from_header) {
            if (device.manufacturer == NULL)
                device.manufacturer = frames[f].manufacturer;
            if (device.model_name == NULL)
                device.model_name = frames[f].model_name;
            if (device.software_versions == NULL)
                device.software_versions = frames[f].software_versions;
        }
    }
    screen_example examples[DEVICE_FRAMES_MAX];
    for (size_t f = 0; f < frame_count; f++)
        examples[f] = frames[f].example;
    char report[DEVICE_REPORT_SIZE];
    mitilog_error error;
    screen_profile *profile = NULL;
    exit_status = EXIT_STATUS_FAILURE;
    if (screen_learn(&device, key, examples, frame_count, &profile, report, sizeof report,
                     &error) != MITILOG_OK) {
        fprintf(stderr, "mitilog device learn: %s\n%s", error.text, report);
        goto done;
    }
    char *text = NULL;
    if (screen_profile_to_text(profile, &text, &error) != MITILOG_OK) {
        fprintf(stderr, "mitilog device learn: %s\n", error.text);
        screen_profile_free(profile);
        goto done;
    }
    if (print_only) {
        fputs(report, stderr);
        fputs(text, stdout);
        exit_status = EXIT_STATUS_SUCCESS;
    } else {
        config config;
        store *st = NULL;
        int version = 0;
        if (cli_load_config(config_path, &config) != 0) {
            exit_status = EXIT_STATUS_USAGE;
        } else if (cli_prepare_data_directory(&config, &error) != 0 ||
                   store_open(config.database_path, (int)config.busy_timeout_ms, &st, &error) !=
                       MITILOG_OK) {
            fprintf(stderr, "mitilog device learn: %s\n", error.text);
        } else {
            store_screen_profile_new row = {.key = key,
                                            .manufacturer = device.manufacturer,
                                            .model_name = device.model_name,
                                            .software_versions = device.software_versions,
                                            .rows = examples[0].image.height,
                                            .columns = examples[0].image.width,
                                            .text = text,
                                            .report = report,
                                            .example = frames[0].file,
                                            .example_size = frames[0].file_size};
            if (store_screen_profile_put(st, &row, &version, &error) != MITILOG_OK) {
                fprintf(stderr, "mitilog device learn: %s\n", error.text);
            } else {
                printf("%sstored %s version %d as proposed; check it with 'mitilog device "
                       "show %s' and the dashboard's Devices page, then 'mitilog device "
                       "activate %s'\n",
                       report, key, version, key, key);
                exit_status = EXIT_STATUS_SUCCESS;
            }
        }
        *st_out = st;
        config_free(&config);
    }
    free(text);
    screen_profile_free(profile);
done:
    for (size_t f = 0; f < frame_count; f++)
        frame_free(&frames[f]);
    return exit_status;
}

int command_device(int argc, char **argv)
{
    if (argc < 2 || cli_wants_help(argc, argv))
        return device_usage(cli_wants_help(argc, argv) ? stdout : stderr);
    const char *action = argv[1];
    mitilog_error initialise_error = {{0}};
    if ((strcmp(action, "bench") == 0 || strcmp(action, "learn") == 0) &&
        dcm_initialise(3, &initialise_error) != MITILOG_OK) {
        fprintf(stderr, "mitilog device %s: %s\n", action, initialise_error.text);
        return EXIT_STATUS_FAILURE;
    }
    if (strcmp(action, "bench") == 0)
        return argc == 3 ? device_bench(argv[2]) : device_usage(stderr);
    const char *config_path = NULL, *key = NULL, *by = NULL;
    int version = 0;
    for (int i = 2; i < argc; i++) {
        if (strcmp(argv[i], "--config") == 0 && i + 1 < argc)
            config_path = argv[++i];
        else if (strcmp(action, "learn") == 0)
            continue;
        else if (strcmp(argv[i], "--version") == 0 && i + 1 < argc)
            version = atoi(argv[++i]);
        else if (strcmp(argv[i], "--by") == 0 && i + 1 < argc)
            by = argv[++i];
        else if (argv[i][0] != '-' && key == NULL)
            key = argv[i];
        else
            return device_usage(stderr);
    }
    if (strcmp(action, "learn") == 0) {
        store *st = NULL;
        int status = device_learn(argc, argv, &st, config_path);
        store_close(st);
        return status;
    }
    int needs_key = strcmp(action, "list") != 0;
    if ((needs_key && key == NULL) || (!needs_key && key != NULL) ||
        (strcmp(action, "show") != 0 && strcmp(action, "list") != 0 &&
         strcmp(action, "activate") != 0 && strcmp(action, "retire") != 0))
        return device_usage(stderr);
    config config;
    if (cli_load_config(config_path, &config) != 0) {
        config_free(&config);
        return EXIT_STATUS_USAGE;
    }
    int exit_status = EXIT_STATUS_FAILURE;
    mitilog_error error = {{0}};
    store *st = NULL;
    if (cli_prepare_data_directory(&config, &error) != 0 ||
        store_open(config.database_path, (int)config.busy_timeout_ms, &st, &error) != MITILOG_OK) {
        /* the reason is printed below */
    } else if (strcmp(action, "list") == 0) {
        char *json = NULL;
        if (store_screen_profiles_json(st, &json, &error) == MITILOG_OK) {
            printf("%s\n", json);
            exit_status = EXIT_STATUS_SUCCESS;
        }
        free(json);
    } else if (strcmp(action, "show") == 0) {
        store_screen_profile_row row;
        if (store_screen_profile_get(st, key, version, &row, &error) == MITILOG_OK) {
            printf("# %s version %d, %s\n", key, row.version, row.state);
            for (char *line = strtok(row.report, "\n"); line != NULL; line = strtok(NULL, "\n"))
                printf("# %s\n", line);
            printf("%s", row.text);
            store_screen_profile_row_free(&row);
            exit_status = EXIT_STATUS_SUCCESS;
        }
    } else if (strcmp(action, "activate") == 0) {
        const char *who = by != NULL ? by : getenv("USER");
        if (store_screen_profile_activate(st, key, version, who ? who : "unknown", &error) ==
            MITILOG_OK) {
            printf("%s is active: frames of this device are read with it from now on\n", key);
            exit_status = EXIT_STATUS_SUCCESS;
        }
    } else if (store_screen_profile_retire(st, key, &error) == MITILOG_OK) {
        printf("%s retired: its frames are no longer read from the pixels\n", key);
        exit_status = EXIT_STATUS_SUCCESS;
    }
    if (exit_status != EXIT_STATUS_SUCCESS && error.text[0] != '\0')
        fprintf(stderr, "mitilog device %s: %s\n", action, error.text);
    store_close(st);
    config_free(&config);
    return exit_status;
}
