/*
 * sim_device.c - the scanners of the simulated department and the designs
 * of their screens (docs/demo.md, "Screens"). Every name, layout and
 * colour here is invented for the simulator; the fonts are Debian's
 * (fonts-dejavu-core, fonts-liberation2, fonts-freefont-ttf).
 *
 * Without --screens every room has the same header-only scanner
 * (SIM-US 1, tiny matrices), as the simulator always had. With --screens
 * each room has its own scanner with its own identity (Manufacturer,
 * Model Name, Software Versions, Rows x Columns) and screen:
 *
 *   US-ROOM-1    Ambervale AV-40, header and pixels; its software moves
 *                from 4.0.2 to 4.1.0 in the middle of the run (day 15 of
 *                28) and the text moves from the top to the bottom strip
 *   US-ROOM-2    Northmere NM-7, header and pixels, two decimals; now and
 *                then its header holds the indices of the capture before
 *   US-ROOM-3    Ambervale AV-62, header and pixels, left column
 *   US-ROOM-4    Northmere NM-3, pixels only (no indices in the header)
 *   US-MATERNITY Mitilog Simulated Systems SIM-US 5, header and pixels
 */
#include "sim/sim.h"

#include <stddef.h>

#define FONT_DIR "/usr/share/fonts/truetype/"
#define DEJAVU_MONO FONT_DIR "dejavu/DejaVuSansMono.ttf"
#define DEJAVU_SANS FONT_DIR "dejavu/DejaVuSans.ttf"
#define LIBERATION_SANS FONT_DIR "liberation2/LiberationSans-Regular.ttf"
#define FREE_MONO FONT_DIR "freefont/FreeMono.ttf"
#define FREE_SANS FONT_DIR "freefont/FreeSans.ttf"

/* JPEG baseline, JPEG-LS lossless, RLE lossless (PS3.5 section 10 and
 * Annex A.4). */
#define SYNTAX_JPEG_BASELINE "1.2.840.10008.1.2.4.50"
#define SYNTAX_JPEG_LS_LOSSLESS "1.2.840.10008.1.2.4.80"
#define SYNTAX_RLE "1.2.840.10008.1.2.5"

static const sim_device sim_header_only = {"sim-us-1",
                                           SIM_MANUFACTURER,
                                           SIM_MODEL_NAME,
                                           "SIM 1.0",
                                           0,
                                           0,
                                           1,
                                           0,
                                           NULL,
                                           {NULL,
                                            NULL,
                                            0,
                                            NULL,
                                            0,
                                            0,
                                            {0, 0, 0},
                                            {0, 0, 0},
                                            {NULL, NULL, NULL, NULL},
                                            1,
                                            NULL,
                                            0,
                                            NULL,
                                            NULL,
                                            NULL,
                                            NULL}};

enum {
    DEVICE_ROOM_1,
    DEVICE_ROOM_1_UPDATED,
    DEVICE_ROOM_2,
    DEVICE_ROOM_3,
    DEVICE_ROOM_4,
    DEVICE_MATERNITY,
    DEVICE_COUNT
};

/* One device per paragraph, its fields in the order of sim_device. */
/* clang-format off */
static const sim_device sim_screen_devices[DEVICE_COUNT] = {
    [DEVICE_ROOM_1] = {
        "ambervale-av40-4.0.2", "Ambervale Simulated Sonics", "AV-40",
        "4.0.2", 192, 144, 1, 0, SYNTAX_JPEG_LS_LOSSLESS,
        {DEJAVU_MONO, "fonts-dejavu-core", 12, "H|D|I|F G P R", 0, 0,
         {255, 255, 255}, {170, 170, 170}, {"MI ", "TIs ", "TIb ", "TIc "},
         1, "Wrenmoor Vale GH", 0, "%.1fMHz", "G%d", "D%dcm", "%dHz"}},
    [DEVICE_ROOM_1_UPDATED] = {
        "ambervale-av40-4.1.0", "Ambervale Simulated Sonics", "AV-40",
        "4.1.0", 192, 144, 1, 0, SYNTAX_JPEG_LS_LOSSLESS,
        {DEJAVU_MONO, "fonts-dejavu-core", 12, "I|F G P R|H|D", 0, 1,
         {255, 255, 255}, {170, 170, 170}, {"MI ", "TIs ", "TIb ", "TIc "},
         1, "Wrenmoor Vale GH", 0, "%.1fMHz", "G%d", "D%dcm", "%dHz"}},
    [DEVICE_ROOM_2] = {
        "northmere-nm7", "Northmere Simulated Imaging", "NM-7", "7.3.1",
        224, 168, 1, 1, SYNTAX_JPEG_BASELINE,
        {LIBERATION_SANS, "fonts-liberation2", 16, "D|M|S|X|F|G|P|R", 1, 0,
         {255, 220, 0}, {200, 200, 200}, {"MI:", "TIS:", "TIB:", "TIC:"},
         2, "Wrenmoor Vale", 1, "%.1f MHz", "Gain %d", "%d.0cm", "FR %d"}},
    [DEVICE_ROOM_3] = {
        "ambervale-av62", "Ambervale Simulated Sonics", "AV-62", "2.2.0",
        224, 168, 1, 0, SYNTAX_RLE,
        {FREE_MONO, "fonts-freefont-ttf", 18, "D|M|S|X|F|G|R", 0, 0,
         {0, 230, 255}, {190, 190, 190}, {"MI ", "TIS ", "TIB ", "TIC "},
         1, "WVGH", 2, "%.1fMHz", "G %d", "%dcm", "%dHz"}},
    [DEVICE_ROOM_4] = {
        "northmere-nm3", "Northmere Simulated Imaging", "NM-3", "3.0.5",
        160, 120, 0, 0, SYNTAX_RLE,
        {FREE_SANS, "fonts-freefont-ttf", 10, "H|D|I|F G", 0, 0,
         {120, 255, 120}, {210, 210, 210}, {"MI ", "TIs", "TIb", "TIC "},
         1, "Wrenmoor Vale GH", 0, "%.1fMHz", "G%d", "D%dcm", "%dHz"}},
    [DEVICE_MATERNITY] = {
        "mitilog-sim-us-5", SIM_MANUFACTURER, "SIM-US 5", "5.1",
        160, 120, 1, 0, SYNTAX_JPEG_LS_LOSSLESS,
        {DEJAVU_SANS, "fonts-dejavu-core", 11, "I|F G R|H|D", 0, 1,
         {230, 230, 230}, {160, 160, 160}, {"MI ", "TIS ", "TIb", "TIC "},
         1, "Wrenmoor Vale GH", 1, "%.1fMHz", "G%d", "D%dcm", "%dHz"}},
};
/* clang-format on */

int sim_software_update_day(int days) { return days >= 2 ? days / 2 : days; }

const sim_device *sim_device_of(int room, int day_index, int days, int screens)
{
    if (!screens || room < 0 || room >= SIM_ROOM_COUNT)
        return &sim_header_only;
    switch (room) {
    case 0:
        return &sim_screen_devices[day_index >= sim_software_update_day(days)
                                       ? DEVICE_ROOM_1_UPDATED
                                       : DEVICE_ROOM_1];
    case 1: return &sim_screen_devices[DEVICE_ROOM_2];
    case 2: return &sim_screen_devices[DEVICE_ROOM_3];
    case 3: return &sim_screen_devices[DEVICE_ROOM_4];
    default: return &sim_screen_devices[DEVICE_MATERNITY];
    }
}
