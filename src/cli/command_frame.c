/* mitilog frame [--index N] [--colour] --output FILE DICOM_FILE: writes
 * one frame of a file as the pixel reader sees it, a binary PGM (grey)
 * or PPM (--colour, colour objects only), for checking what mitilog
 * decodes against another viewer and for setting up a device. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli/cli_options.h"
#include "cli/commands.h"
#include "dicom/dcm.h"

static int write_pnm(const char *path, const dcm_frame *frame, int colour)
{
    FILE *out = fopen(path, "wb");
    if (out == NULL)
        return -1;
    size_t pixels = (size_t)frame->width * (size_t)frame->height;
    fprintf(out, "P%c\n%d %d\n255\n", colour ? '6' : '5', frame->width, frame->height);
    int written = fwrite(colour ? frame->rgb : frame->grey, colour ? 3 : 1, pixels, out) == pixels;
    return fclose(out) == 0 && written ? 0 : -1;
}

int command_frame(int argc, char **argv)
{
    const char *output = NULL, *input = NULL;
    long index = 0;
    int colour = 0, usage = 0;
    for (int i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--output") == 0 && i + 1 < argc)
            output = argv[++i];
        else if (strcmp(argv[i], "--index") == 0 && i + 1 < argc) {
            char *end = NULL;
            index = strtol(argv[++i], &end, 10);
            if (end == NULL || *end != '\0' || index < 0)
                usage = 1;
        } else if (strcmp(argv[i], "--colour") == 0)
            colour = 1;
        else if (argv[i][0] != '-' && input == NULL)
            input = argv[i];
        else
            usage = 1;
    }
    int help = cli_wants_help(argc, argv);
    if (help || usage || input == NULL || output == NULL) {
        fprintf(help ? stdout : stderr,
                "usage: mitilog frame [--index N] [--colour] --output FILE DICOM_FILE\n"
                "Writes frame N (from 0; default 0) of DICOM_FILE as the pixel reader sees\n"
                "it: 8-bit grey as a binary PGM, or with --colour the RGB of a colour object\n"
                "as a PPM. Native, RLE, JPEG, JPEG-LS and JPEG 2000 frames are decoded.\n"
                "Prints the size and the number of frames. Exit status 1 when the frame\n"
                "cannot be decoded (the reason is printed).\n");
        return help ? EXIT_STATUS_SUCCESS : EXIT_STATUS_USAGE;
    }
    mitilog_error error;
    if (dcm_initialise(3, &error) != MITILOG_OK) {
        fprintf(stderr, "mitilog frame: %s\n", error.text);
        return EXIT_STATUS_FAILURE;
    }
    dcm_object *object = NULL;
    dcm_frame frame;
    memset(&frame, 0, sizeof frame);
    int exit_status = EXIT_STATUS_FAILURE;
    if (dcm_object_load(input, &object, &error) != MITILOG_OK ||
        dcm_object_frame(object, (size_t)index, &frame, &error) != MITILOG_OK) {
        fprintf(stderr, "mitilog frame: %s: not read: %s\n", input, error.text);
        goto done;
    }
    if (colour && frame.rgb == NULL) {
        fprintf(stderr, "mitilog frame: %s is not a colour object; leave out --colour\n", input);
        goto done;
    }
    if (write_pnm(output, &frame, colour) != 0) {
        fprintf(stderr, "mitilog frame: cannot write %s\n", output);
        goto done;
    }
    printf("frame %ld of %zu: %dx%d %s\n", index, frame.frame_count, frame.width, frame.height,
           frame.rgb != NULL ? "colour" : "grey");
    exit_status = EXIT_STATUS_SUCCESS;
done:
    dcm_frame_free(&frame);
    dcm_object_free(object);
    return exit_status;
}
