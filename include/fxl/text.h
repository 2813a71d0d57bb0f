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

#endif
