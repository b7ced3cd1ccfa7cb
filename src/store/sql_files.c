#include "store/sql_files.h"

#include <string.h>

const char *sql_file_text(const char *name)
{
    for (const sql_file *file = sql_files; file->name != NULL; file++) {
        if (strcmp(file->name, name) == 0)
            return file->text;
    }
    return NULL;
}
