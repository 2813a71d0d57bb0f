/* Checks on text that comes from outside (arguments, files, prompts): UTF-8
 * validity, control characters, and a safe form for echoing text back in a
 * message. Pure functions, no I/O. docs/hazards.md explains why. */
#ifndef FXL_TEXT_H
#define FXL_TEXT_H

#include <stddef.h>

/* Byte offset of the first byte of s[0..len) that breaks UTF-8 as RFC 3629
 * defines it (overlong forms, surrogates U+D800..U+DFFF and code points above
 * U+10FFFF are invalid), or -1 when all of it is valid UTF-8. */
long fxl_utf8_invalid_at(const char *s, size_t len);

/* Byte offset of the first control character in the NUL-terminated UTF-8
 * text s: C0 (U+0000..U+001F, tab and line feed included), DEL (U+007F) or
 * C1 (U+0080..U+009F); -1 when there is none. */
long fxl_text_control_at(const char *s);

/* Byte offset of the first JSON escape "\u0000" inside s[0..len) (a NUL that
 * a JSON parser would decode and C strings would silently cut at), or -1.
 * An escaped backslash followed by "u0000" is plain text and not counted. */
long fxl_json_nul_escape_at(const char *s, size_t len);

/* Copies s into out (out_size >= 4) for showing it in a message: invalid
 * UTF-8 bytes and control characters become '?', and text longer than
 * out_size - 1 bytes is cut on a character boundary and ends with "...".
 * s NULL gives "". */
void fxl_text_printable(char *out, size_t out_size, const char *s);

/* Byte offset of the first bidirectional formatting character in the UTF-8
 * text s - U+061C ARABIC LETTER MARK, U+200E/U+200F (LRM, RLM), U+202A..U+202E
 * (embeddings and overrides), U+2066..U+2069 (isolates), the "bidi controls"
 * of Unicode UAX #9 section 2 - or -1. They can make text display in another
 * order than it is stored ("Trojan Source", CVE-2021-42574). */
long fxl_text_bidi_at(const char *s);

/* Byte offset of the first invisible zero-width character: U+200B ZERO WIDTH
 * SPACE, U+200C ZWNJ, U+200D ZWJ, U+2060 WORD JOINER, U+FEFF (BOM/ZWNBSP),
 * U+180E, U+00AD SOFT HYPHEN; or -1. Two identifiers that look the same must
 * be the same. */
long fxl_text_zero_width_at(const char *s);

/* Checks text for an identifier (MRN, serial, login, label, machine or beam
 * name): valid UTF-8, no control, bidi or zero-width character, no leading
 * or trailing space (ASCII space or U+00A0). Returns 0, or -1 with *why set
 * to a short reason ("contains a zero-width character", ...) and *at to the
 * byte offset. why and at may be NULL. */
int fxl_text_identifier_check(const char *s, const char **why, long *at);

/* Checks text for a name or note (names may hold any printable UTF-8):
 * valid UTF-8, no control character, no bidi formatting character. Same
 * returns as fxl_text_identifier_check. */
int fxl_text_name_check(const char *s, const char **why, long *at);

#endif
