/* Person names compared as the same person's name written twice: by a
 * planning system in a DICOM Person Name and by a department in fxledger.
 * Both are brought to one form before comparing: Unicode normalisation form
 * C (canonical composition: "e" + U+0301 and U+00E9 are the same letter),
 * full Unicode case folding ("MÜLLER", "Müller" and "müller"; "Straße" and
 * "STRASSE"), and white space trimmed and collapsed to one space. Nothing
 * else is forgiven: no accent is dropped, no transliteration is made
 * ("Müller" is not "Mueller"). Unicode Standard chapter 3 (normalisation,
 * default case folding), UAX #15; with utf8proc. Pure functions. */
#ifndef FXL_NAMES_H
#define FXL_NAMES_H

#include <stddef.h>

/* Longest folded form kept (bytes, with the NUL). */
#define FXL_NAME_KEY_MAX 512

/* The compared form of the UTF-8 text `name` into out[size]: NFC, case
 * folded, spaces collapsed. Returns 0, or FXL_EINVAL when name is not valid
 * UTF-8 or its form does not fit (out then holds ""). name NULL is "". */
int fxl_name_key(char *out, size_t size, const char *name);

/* 1 when a and b have the same compared form, 0 when they differ or one
 * cannot be compared (invalid UTF-8). */
int fxl_name_same(const char *a, const char *b);

#endif
