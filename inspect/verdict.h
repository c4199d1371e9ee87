/*
 * inspect/verdict.h - inspecting one frame: find the part, fit the model,
 * measure the outline, judge it against the taught limits and the drawing
 * gauges, and say why.
 *
 * Outcomes are kept apart (DESIGN.md): a pass only comes from a converged
 * fit that passed every check; no part, a part cut by the frame edge or two
 * parts are rejects with their reason; a fit that did not converge, a frame
 * of the wrong size or a model that cannot inspect are faults (the PLC
 * treats a fault as a reject).
 *
 * Every reason has a code (the number the PLC reads), a short name, the
 * measured value and its limit, and one sentence for a person; local
 * defects also say where: outline, position along it (fraction of its
 * length and mm from its first landmark), angle on the part (degrees in the
 * part's own frame, 0 = the model's +x axis, clockwise on screen), depth and
 * extent in px and mm.
 */
#ifndef MB_VERDICT_H
#define MB_VERDICT_H

#include <stdint.h>

#include "asm.h"
#include "camera.h"
#include "image.h"
#include "locate.h"
#include "part_model.h"

typedef enum {
    MB_VERDICT_PASS = 1,
    MB_VERDICT_REJECT = 2,
    MB_VERDICT_FAULT = 3
} mb_verdict_kind;

/** Reason codes (the PLC's primary reason register). Stable: append only. */
typedef enum {
    MB_REASON_NONE = 0,
    MB_REASON_NO_PART = 1,     /**< no part in view */
    MB_REASON_OFF_EDGE = 2,    /**< part cut by the frame edge */
    MB_REASON_TWO_PARTS = 3,   /**< more than one part in view */
    MB_REASON_NO_FIT = 4,      /**< the model fit did not converge (fault) */
    MB_REASON_SIZE = 5,        /**< overall size out of band */
    MB_REASON_MODE = 6,        /**< one mode of variation out of band */
    MB_REASON_SHAPE = 7,       /**< overall shape distance T^2 over limit */
    MB_REASON_RESIDUAL = 8,    /**< shape outside the model (residual) */
    MB_REASON_NICK = 9,        /**< local deviation inward: material missing */
    MB_REASON_FLASH = 10,      /**< local deviation outward: material added */
    MB_REASON_GAP = 11,        /**< edge missing along a stretch (tear) */
    MB_REASON_GAUGE = 12,      /**< a drawing gauge out of tolerance */
    MB_REASON_DEFORM = 13,     /**< an outline departs from the taught shape
                                    over a long stretch (bent, dented) */
    MB_REASON_SPOT = 14,       /**< a spot on the part beside its edge: dirt,
                                    a fibre, a hole through it */
    MB_REASON_FRAME = 20,      /**< frame unusable (size) (fault) */
    MB_REASON_MODEL = 21,      /**< no usable model (fault) */
    MB_REASON_INTERNAL = 22    /**< internal error (fault) */
} mb_reason_code;

/** Short stable name of a reason ("nick", "off-edge", ...). */
const char *mb_reason_name(mb_reason_code c);

/** 1 for the reasons that carry a place on the part (nick, flash, gap,
    deform, spot): outline, position, angle, x/y, depth, extent. */
int mb_reason_located(mb_reason_code c);

#define MB_MAX_REASONS 12

typedef struct {
    mb_reason_code code;
    double value;       /**< measured: px/mm/sd/T^2 as the code implies */
    double limit;       /**< its limit (same unit) */
    int mode;           /**< MODE: which mode (1-based); GAUGE: gauge index */
    int outline;        /**< NICK/FLASH/GAP: outline (0 outer edge) */
    double position;    /**< along that outline, fraction 0..1 of its length */
    double position_mm; /**< along it from its first landmark, mm (px when
                             no scale) */
    double angle_deg;   /**< angle on the part, part frame, degrees */
    double x, y;        /**< image px of the worst point */
    double depth_px, depth_mm; /**< NICK/FLASH: deepest deviation */
    double extent_mm;   /**< NICK/FLASH/GAP: length beyond the limit */
    char text[200];     /**< one sentence for a person */
} mb_reason;

typedef struct {
    char name[48];
    double value;       /**< mm (mm^2 for area) */
    double nominal;
    double deviation;   /**< value - nominal */
    int ok;
} mb_gauge_value;

typedef struct {
    mb_verdict_kind verdict;
    int n_reasons;
    mb_reason reasons[MB_MAX_REASONS]; /**< primary first */
    int converged;
    mb_pose pose;          /**< model frame -> image px */
    double angle_deg, scale;
    int n_modes;
    const double *b_sd;    /**< k values, sd; valid until the next run */
    double t2, spe;
    double size_px, size_mm; /**< RMS radius of the measured outline */
    int n_gauges;
    mb_gauge_value gauges[MB_MAX_GAUGES];
    const mb_layout *layout;
    const double *measured; /**< 2n image px; valid until the next run */
    const double *model_xy; /**< 2n image px */
    const double *corresponded; /**< 2n image px: the measured outline at
                                     the model's landmarks (nearest points
                                     of the measured polyline); what the
                                     scores are computed from */
    const double *dist;     /**< n px, measured - model along the normal */
    const uint8_t *valid;   /**< n */
    double ms;              /**< time of the inspection, ms */
} mb_verdict;

typedef struct {
    double mm_per_px;   /**< 0: the calibration's local scale at the frame
                             centre when calib is given, else the model's;
                             still 0: sizes in px only */
    /** NULL: none. Given: gauges are measured on the conveyor plane in mm
        (every measured point through mb_calib_points_to_mm) and size_mm
        uses the local scale at the part centre. Copied by
        mb_inspector_create (it need not outlive the call); its frame size
        must be the model's. */
    const mb_calib *calib;
    mb_asm_params search;
    mb_locate_params locate;
    int gap_run;        /**< consecutive landmarks without an edge that make
                             a gap; default 3 */
} mb_inspect_params;

typedef struct mb_inspector mb_inspector;

void mb_inspect_params_default(mb_inspect_params *p);

/**
 * Make an inspector for a part model (referenced: it must outlive the
 * inspector) and frames of the model's size. Everything is allocated here.
 * Return value: 0; MB_EINVAL (the model cannot inspect: no profiles or no
 * limits; err says which); MB_ESIZE (a calibration for frames of another
 * size than the model's); MB_ENOMEM; codes of the search set-up.
 */
int mb_inspector_create(const mb_part_model *pm, const mb_inspect_params *p,
                        mb_inspector **out, char *err);

void mb_inspector_close(mb_inspector *ins);

/**
 * Inspect one frame. Allocates nothing. Always fills v (a fault with its
 * reason when the frame cannot be inspected). Returns 0, or MB_EINVAL for
 * NULL arguments.
 */
int mb_inspector_run(mb_inspector *ins, const mb_image *frame, mb_verdict *v);

/**
 * mb_inspector_run in two halves, for a free-running camera that looks at
 * many frames and inspects few: mb_inspector_look builds the pyramid and
 * finds the part (the cheap half); it returns 1 when a part lies wholly in
 * view and mb_inspector_finish may fit and judge it, or 0 when v is
 * already final (no part, cut by the edge, two parts, a fault).
 * mb_inspector_finish must follow that look, with the frame unchanged; v
 * is then as mb_inspector_run's (v->ms counts both halves). Allocate
 * nothing. Return value: look 1 or 0, finish 0; MB_EINVAL for NULL
 * arguments, and for finish without a look that found a part.
 */
int mb_inspector_look(mb_inspector *ins, const mb_image *frame, mb_verdict *v);
int mb_inspector_finish(mb_inspector *ins, mb_verdict *v);

/** What the last look or run found of the part (position, box, the frame
    edges it touches); valid until the next look or run. NULL for NULL. */
const mb_locate_result *mb_inspector_located(const mb_inspector *ins);

/**
 * Write the picture of an inspection (io/overlay.h) to path: the frame,
 * the model and measured outlines, a ring around every located reason.
 * ring_px > 0 gives every ring that radius; 0 sizes each ring by the
 * defect's extent. Return value: as mb_overlay_save.
 */
int mb_verdict_save_overlay(const mb_verdict *v, const mb_image *frame,
                            const char *path, double ring_px, char *err);

#endif
