/*
 * calibration/target.h - modeband's own printable calibration target: its
 * geometry, the marks that fix its orientation and carry its pitch, and the
 * SVG text of a printable sheet at true scale.
 *
 * Geometry (all lengths in mm on the printed sheet):
 *   - R rows x C columns of dark dots on white, centre to centre `pitch`
 *     apart in both directions; dot diameter 0.5 pitch.
 *   - Target coordinates (X, Y): origin at the centre of the dot of row 0,
 *     column 0; X along a row (towards higher columns), Y down a column
 *     (towards higher rows), as printed (x right, y down on the sheet). Dot
 *     (r, c) is at (c pitch, r pitch).
 *   - Cells: the x (C-1) squares between four neighbouring dots. Cell
 *     (r, c) has its centre at ((c + 0.5) pitch, (r + 0.5) pitch). A cell
 *     either is empty or carries a mark: a smaller dark dot of diameter
 *     0.25 pitch at its centre. Between a mark's edge and a dot's edge
 *     there is 0.33 pitch of white, so a mark never touches a dot.
 *   - Orientation: the three corner cells (0, 0), (0, C-2) and (R-2, 0)
 *     carry a mark, the fourth corner cell (R-2, C-2) never does. The dot
 *     of row 0, column 0 is therefore the corner where the right angle of
 *     the three marked corners is, opposite the unmarked one.
 *   - Pitch code: the other cells, in raster order (row by row, each row
 *     by increasing column, corner cells skipped), carry a 12-bit word,
 *     least significant bit first, mark = 1: bits 0..9 hold v =
 *     round(pitch / 0.1 mm) (1 .. 1023), bits 10..11 hold v mod 3, which
 *     catches any single misread bit. Cells after the 12th stay empty.
 *     So a camera frame tells which pitch was printed, and a wrong --pitch
 *     is refused instead of giving silently wrong millimetres.
 *   - R and C are at least 5 (then exactly 16 cells: 4 corners + 12 code
 *     bits) and at most MB_TARGET_MAX_SIDE; the pitch is a multiple of
 *     0.1 mm from 1.0 to 102.3 mm.
 * The sheet keeps 1.5 pitch of white around the outer dot centres (the
 * detector needs a quiet zone), and prints its parameters and a scale bar
 * below the grid, at least 2 pitch away from the last row.
 */
#ifndef MB_TARGET_H
#define MB_TARGET_H

#include <stddef.h>

/** Smallest and largest number of rows or columns. */
#define MB_TARGET_MIN_SIDE 5
#define MB_TARGET_MAX_SIDE 64
/** Pitch limits, mm (the code holds tenths of a mm in 10 bits). */
#define MB_TARGET_MIN_PITCH 1.0
#define MB_TARGET_MAX_PITCH 102.3
/** Bits of the pitch code (10 value bits + 2 check bits). */
#define MB_TARGET_CODE_BITS 12

/** A target's geometry. Plain values; fill with mb_target_init. */
typedef struct {
    int rows;             /**< R, dots per column */
    int cols;             /**< C, dots per row */
    double pitch;         /**< mm, centre to centre */
    double dot_diameter;  /**< mm, 0.5 pitch */
    double mark_diameter; /**< mm, 0.25 pitch */
    int code;             /**< the 12-bit word the marks carry */
} mb_target;

/**
 * Fill t for rows x cols dots at the given pitch (mm).
 * Return value: 0; MB_EINVAL (t NULL); MB_ERANGE (rows or cols outside
 * MB_TARGET_MIN_SIDE..MB_TARGET_MAX_SIDE, pitch outside
 * MB_TARGET_MIN_PITCH..MB_TARGET_MAX_PITCH or not a multiple of 0.1 mm).
 * err gets a sentence naming the value.
 */
int mb_target_init(int rows, int cols, double pitch, mb_target *t, char *err);

/**
 * The same, but any pitch within the code's range is accepted and coded
 * as its nearest 0.1 mm: for a printed target whose actual pitch was
 * measured (e.g. 9.96 mm for a 10.0 mm target printed at 99.6 %).
 * Return value: as mb_target_init.
 */
int mb_target_init_measured(int rows, int cols, double pitch, mb_target *t,
                            char *err);

/** The 12-bit code word of a pitch (mm): v | (v mod 3) << 10, v =
    round(pitch / 0.1). Returns -1 for a pitch the code cannot hold. */
int mb_target_code_of_pitch(double pitch);

/** The pitch (mm) a 12-bit word holds, or -1 when its check bits do not
    match its value bits (or the value is 0). */
double mb_target_pitch_of_code(int code);

/** 1 when cell (r, c) (0 <= r < rows-1, 0 <= c < cols-1) carries a mark,
    0 when it is empty or outside the cell grid. */
int mb_target_cell_marked(const mb_target *t, int r, int c);

/**
 * The code bit a cell carries: its bit index 0..11, -1 for a corner cell
 * or a cell beyond the 12th code cell, -2 for a cell outside the grid.
 */
int mb_target_cell_bit(const mb_target *t, int r, int c);

/**
 * The SVG text of the printable sheet at true scale (width and height in
 * mm, user units mm), in a malloc'd NUL-terminated buffer *svg of *len
 * bytes that the caller frees. The sheet prints the rows, columns, pitch,
 * dot diameter, the command that calibrates with it, and a scale bar of
 * (C-1) pitch to check the printer's scale with a ruler.
 * Return value: 0; MB_EINVAL; MB_ENOMEM.
 */
int mb_target_svg(const mb_target *t, char **svg, size_t *len, char *err);

#endif
