/*
 * io/file_list.h - the files of a folder with given extensions, sorted by
 * name (byte order), so runs over a folder are reproducible.
 */
#ifndef MB_FILE_LIST_H
#define MB_FILE_LIST_H

typedef struct {
    int count;
    char **paths; /**< "DIR/name", malloc'd */
} mb_file_list;

/**
 * List regular files in dir whose names end in one of exts (case-insensitive,
 * e.g. {".json", ".csv"}). Hidden files are skipped.
 * Return value: 0 (count may be 0); MB_ENOTFOUND (no such folder); MB_EIO;
 * MB_ENOMEM. err names the folder.
 */
int mb_file_list_dir(const char *dir, const char *const *exts, int n_exts,
                     mb_file_list *out, char *err);

/** Free the list. NULL-safe. */
void mb_file_list_free(mb_file_list *l);

#endif
