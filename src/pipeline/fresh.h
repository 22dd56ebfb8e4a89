/* fresh.h - whether a subject's outputs are current: fingerprints of its inputs' content. */
#ifndef SR_FRESH_H
#define SR_FRESH_H

#include "../io/jdoc.h"
#include "../io/study.h"

/*
 * The fingerprints (fprint.h) of every input of a subject: the parcels image
 * and names, the mask, and per run the BOLD (a .nii.gz by its size and gzip
 * trailer, else a CRC-32 of the whole file), events, sidecar and confounds;
 * an object path -> fingerprint ("absent" for a listed file that is not
 * there), owned by the caller. NULL when the runs cannot be listed.
 */
jdoc *fresh_record(const study *st, const char *label);

/*
 * 1 when the run record at runjson holds the same study text as st and the
 * same fingerprints as the inputs have now (the same files, each with the
 * same content): modification times play no part.
 */
int fresh_matches(const study *st, const char *label, const char *runjson);

#endif
