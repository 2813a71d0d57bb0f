/* A DICOM Part 10 file (PS3.10) read with DCMTK's dcmdata and
 * written out in the DICOM JSON Model (PS3.18 Annex F) for
 * fxl_dicom_plan_parse, which owns every rule about what an RT Plan must
 * hold. This file only decides what DCMTK may read: the preamble and magic,
 * the transfer syntax (named when refused), a file that DCMTK cannot read to
 * its end, and the character set. No value is taken from the data set here,
 * so an absent attribute stays absent (never DCMTK's default of 0 or "").
 * The C interface is include/fxl/dicom_part10.h; docs/dicom-import.md.
 * Built into the module fxledger-dicom.so (include/fxl/module.h), which the
 * program loads when a Part 10 file is imported. */
#include "dcmtk/config/osconfig.h"

#include "dcmtk/dcmdata/dcdatset.h"
#include "dcmtk/dcmdata/dcdeftag.h"
#include "dcmtk/dcmdata/dcdict.h"
#include "dcmtk/dcmdata/dcfilefo.h"
#include "dcmtk/dcmdata/dcjson.h"
#include "dcmtk/dcmdata/dcmetinf.h"
#include "dcmtk/dcmdata/dcuid.h"
#include "dcmtk/oflog/oflog.h"

#include <cerrno>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <new>
#include <sstream>
#include <string>

#include <unistd.h>
#include <zlib.h>

extern "C" {
#include "fxl/dicom_part10.h"
#include "fxl/fxl.h"
#include "fxl/text.h"
}

namespace {

/* The transfer syntaxes read (PS3.5 section 10 and annex A). */
const char *const ACCEPTED_XFERS[] = {
    UID_LittleEndianImplicitTransferSyntax,     /* 1.2.840.10008.1.2 */
    UID_LittleEndianExplicitTransferSyntax,     /* 1.2.840.10008.1.2.1 */
    UID_DeflatedExplicitVRLittleEndianTransferSyntax, /* 1.2.840.10008.1.2.1.99 */
};

bool accepted_xfer(const OFString &uid)
{
    for (const char *a : ACCEPTED_XFERS)
        if (uid == a)
            return true;
    return false;
}

/* DCMTK logs warnings and errors to stderr; the command line prints one
 * error line of its own, so DCMTK's log is silenced once. */
void quiet_dcmtk()
{
    static bool done = false;

    if (!done) {
        OFLog::configure(OFLogger::OFF_LOG_LEVEL);
        done = true;
    }
}

/* Most bytes a deflated data set may inflate to: the size limit of an RT Plan
 * file (fxl_dicom_plan_read), so that a small file cannot fill the memory. */
constexpr size_t INFLATED_MAX = 16u * 1024u * 1024u;

/* A temporary file that is removed when it goes out of scope. DCMTK is given
 * files rather than memory: only its file streams check an element's length
 * against the bytes that remain (from memory it would allocate whatever
 * length a damaged file claims, up to 4 GiB). */
class TempFile {
  public:
    TempFile() = default;
    TempFile(const TempFile &) = delete;
    TempFile &operator=(const TempFile &) = delete;
    ~TempFile()
    {
        if (!path_.empty())
            unlink(path_.c_str());
    }

    /* Creates the file holding data[0..len); false when that fails. */
    bool write(const unsigned char *data, size_t len)
    {
        const char *dir = std::getenv("TMPDIR");
        std::string tmpl = std::string(dir && *dir ? dir : "/tmp") + "/fxledger-dicom-XXXXXX";
        int fd = mkstemp(&tmpl[0]);

        if (fd < 0)
            return false;
        path_ = tmpl;
        while (len > 0) {
            ssize_t n = ::write(fd, data, len);
            if (n < 0 && errno == EINTR)
                continue;
            if (n <= 0) {
                close(fd);
                return false;
            }
            data += n;
            len -= static_cast<size_t>(n);
        }
        return close(fd) == 0;
    }

    const char *path() const { return path_.c_str(); }

  private:
    std::string path_;
};

/* Inflates the raw deflate stream (RFC 1951, no zlib header: PS3.5 A.5) of
 * data[0..len) into out, at most INFLATED_MAX bytes. 0, or a message. */
const char *inflate_raw(const unsigned char *data, size_t len, std::string &out)
{
    z_stream z;
    unsigned char chunk[65536];
    int zrc;

    std::memset(&z, 0, sizeof z);
    if (inflateInit2(&z, -MAX_WBITS) != Z_OK)
        return "zlib cannot start inflating";
    z.next_in = const_cast<unsigned char *>(data);
    z.avail_in = static_cast<uInt>(len);
    do {
        z.next_out = chunk;
        z.avail_out = sizeof chunk;
        zrc = inflate(&z, Z_NO_FLUSH);
        if (zrc != Z_OK && zrc != Z_STREAM_END) {
            inflateEnd(&z);
            return zrc == Z_BUF_ERROR ? "its deflated data set is cut short" : "its deflated data set is damaged";
        }
        out.append(reinterpret_cast<char *>(chunk), sizeof chunk - z.avail_out);
        if (out.size() > INFLATED_MAX) {
            inflateEnd(&z);
            return "its deflated data set inflates to more than 16 MiB";
        }
    } while (zrc != Z_STREAM_END);
    inflateEnd(&z);
    return nullptr;
}

/* ---- a bound on what DCMTK is asked to read --------------------------------

 * Before DCMTK sees the bytes, the element headers are walked here (PS3.5
 * 7.1 and 7.5): every value length must fit in the bytes that remain of the
 * file and of the item or sequence holding it, and sequences may nest at
 * most SEQ_DEPTH_MAX deep (the JSON Model reader takes no more). DCMTK would
 * otherwise allocate whatever length a damaged file claims before finding
 * that the bytes are not there, and recurse as deep as the file nests. */

constexpr int SEQ_DEPTH_MAX = 8;
constexpr uint32_t UNDEFINED_LENGTH = 0xFFFFFFFFu;

uint16_t le16(const unsigned char *p) { return static_cast<uint16_t>(p[0] | p[1] << 8); }
uint32_t le32(const unsigned char *p)
{
    return static_cast<uint32_t>(p[0]) | static_cast<uint32_t>(p[1]) << 8 | static_cast<uint32_t>(p[2]) << 16 |
           static_cast<uint32_t>(p[3]) << 24;
}

/* VRs with a 2-byte length (PS3.5 table 7.1-2). Every other VR, also one
 * that the standard does not know, has 2 reserved bytes and a 4-byte length,
 * as DCMTK reads it. */
bool long_vr(const unsigned char *vr)
{
    static const char *const shorts[] = {"AE", "AS", "AT", "CS", "DA", "DS", "DT", "FL", "FD", "IS", "LO",
                                         "LT", "PN", "SH", "SL", "SS", "ST", "TM", "UI", "UL", "US"};
    for (const char *v : shorts)
        if (vr[0] == v[0] && vr[1] == v[1])
            return false;
    return true;
}

struct ScanResult {
    const char *why = nullptr;   /* nullptr: all lengths fit */
    unsigned group = 0, element = 0;
    size_t end = 0;              /* where the walk stopped */
};

/* Walks data[pos..len). `explicit_vr`: the VR follows the tag (else the
 * dictionary tells which elements are sequences). `meta_only`: stops at the
 * first element that is not of group 0002. */
ScanResult scan_elements(const unsigned char *data, size_t pos, size_t len, bool explicit_vr, bool meta_only)
{
    struct Open {
        size_t end;       /* SIZE_MAX for an undefined length */
        bool sequence;
    };
    Open open[2 * SEQ_DEPTH_MAX + 2];
    int n_open = 0, depth = 0;
    ScanResult r;

    while (pos < len) {
        while (n_open > 0 && open[n_open - 1].end <= pos) {
            depth -= open[n_open - 1].sequence ? 1 : 0;
            n_open--;
        }
        size_t limit = n_open > 0 && open[n_open - 1].end < len ? open[n_open - 1].end : len;
        if (limit - pos < 8) {
            r.why = "an element header is cut short";
            r.end = pos;
            return r;
        }
        r.group = le16(data + pos);
        r.element = le16(data + pos + 2);
        if (meta_only && r.group != 0x0002)
            break;
        if (r.group == 0xFFFE) {   /* item and delimiters: tag and a 4-byte length, no VR */
            uint32_t ilen = le32(data + pos + 4);
            pos += 8;
            if (r.element == 0xE000) {
                if (ilen != UNDEFINED_LENGTH && ilen > limit - pos) {
                    r.why = "an item is longer than the bytes that remain";
                    r.end = pos;
                    return r;
                }
                if (n_open == static_cast<int>(sizeof open / sizeof open[0])) {
                    r.why = "items nested too deep";
                    return r;
                }
                open[n_open++] = {ilen == UNDEFINED_LENGTH ? SIZE_MAX : pos + ilen, false};
            } else if (r.element == 0xE00D || r.element == 0xE0DD) {
                /* closes the innermost open item (E00D) or sequence (E0DD)
                 * of undefined length */
                bool seq = r.element == 0xE0DD;
                while (n_open > 0) {
                    Open o = open[--n_open];
                    depth -= o.sequence ? 1 : 0;
                    if (o.sequence == seq)
                        break;
                }
            }
            continue;
        }
        uint32_t vlen;
        size_t header;
        bool sequence;
        if (explicit_vr) {
            const unsigned char *vr = data + pos + 4;
            if (vr[0] < 'A' || vr[0] > 'Z' || vr[1] < 'A' || vr[1] > 'Z') {
                r.why = "an element has no valid value representation";
                return r;
            }
            if (long_vr(vr)) {
                if (limit - pos < 12) {
                    r.why = "an element header is cut short";
                    return r;
                }
                vlen = le32(data + pos + 8);
                header = 12;
            } else {
                vlen = le16(data + pos + 6);
                header = 8;
            }
            /* UN of undefined length holds an implicit VR sequence (PS3.5
             * 6.2.2): walked as one. */
            sequence = (vr[0] == 'S' && vr[1] == 'Q') || vlen == UNDEFINED_LENGTH;
        } else {
            vlen = le32(data + pos + 4);
            header = 8;
            sequence = vlen == UNDEFINED_LENGTH ||
                       DcmTag(static_cast<Uint16>(r.group), static_cast<Uint16>(r.element)).getEVR() == EVR_SQ;
        }
        pos += header;
        if (vlen != UNDEFINED_LENGTH && vlen > limit - pos) {
            r.why = "an element is longer than the bytes that remain";
            return r;
        }
        if (!sequence) {
            pos += vlen;
            continue;
        }
        if (++depth > SEQ_DEPTH_MAX) {
            r.why = "sequences are nested deeper than 8";
            return r;
        }
        open[n_open++] = {vlen == UNDEFINED_LENGTH ? SIZE_MAX : pos + vlen, true};
    }
    r.end = pos;
    return r;
}

int scan_refusal(fxl_ctx *ctx, const char *name, const ScanResult &r)
{
    return fxl_fail(ctx, FXL_EINVAL, "file '%s' is cut short or damaged: %s (element (%04X,%04X))", name, r.why,
                    r.group, r.element);
}

/* The converted data set as one JSON object. A DcmDataset writes its members
 * without the enclosing braces in some DCMTK versions and with them in
 * others: whichever it is, the result here is one object. */
int dataset_json(fxl_ctx *ctx, DcmDataset *ds, const char *name, std::string &out)
{
    std::ostringstream os;
    DcmJsonFormatCompact fmt(OFFalse);
    OFCondition st = ds->writeJson(os, fmt);

    if (st.bad())
        return fxl_fail(ctx, FXL_EINVAL, "file '%s': DCMTK cannot write its data set in the DICOM JSON Model: %s",
                        name, st.text());
    out = os.str();
    size_t first = out.find_first_not_of(" \t\r\n");
    if (first == std::string::npos || out[first] != '{')
        out = "{" + out + "}";
    return 0;
}

} // namespace

extern "C" int fxl_dicom_part10_read(fxl_ctx *ctx, const unsigned char *data, size_t len, const char *source,
                                     char **json, size_t *json_len)
{
    const char *name = source ? source : "RT Plan";

    if (!json || !json_len)
        return fxl_fail(ctx, FXL_EINVAL, "internal: no output for the DICOM JSON Model");
    *json = nullptr;
    *json_len = 0;
    if (!fxl_dicom_part10_detect(data, len))
        return fxl_fail(ctx, FXL_EINVAL,
                        "file '%s' is not a DICOM Part 10 file: no 'DICM' after a %d-byte preamble", name,
                        FXL_DICOM_PREAMBLE_LEN);
    quiet_dcmtk();
    /* Implicit VR data sets take their VRs from the data dictionary; without
     * it every attribute would be unknown (UN). */
    if (!dcmDataDict.isDictionaryLoaded())
        return fxl_fail(ctx, FXL_EIO,
                        "cannot read DICOM file '%s': DCMTK's data dictionary is not installed (libdcmtk, "
                        "DCMDICTPATH)", name);
    try {
        DcmFileFormat ff, full;
        DcmDataset inflated;
        TempFile file, inner;
        OFString xfer, charset;
        std::string text;
        long bad;
        int rc;

        /* The file meta information is always explicit VR little endian
         * (PS3.10 7.1). */
        ScanResult meta_scan = scan_elements(data, FXL_DICOM_PREAMBLE_LEN + 4, len, true, true);
        if (meta_scan.why)
            return scan_refusal(ctx, name, meta_scan);
        if (len > UINT32_MAX || !file.write(data, len))
            return fxl_fail(ctx, FXL_EIO, "cannot read DICOM file '%s': no temporary file for DCMTK (TMPDIR)",
                            name);
        /* The file meta information first: it names the transfer syntax. */
        OFCondition st = ff.loadFile(file.path(), EXS_Unknown, EGL_noChange, DCM_MaxReadLength, ERM_metaOnly);
        DcmMetaInfo *meta = ff.getMetaInfo();
        OFCondition xst = meta ? meta->findAndGetOFString(DCM_TransferSyntaxUID, xfer) : EC_TagNotFound;
        if (st.bad())
            return fxl_fail(ctx, FXL_EINVAL, "file '%s': cannot read its DICOM file meta information: %s", name,
                            st.text());
        if (xst.bad() || xfer.empty())
            return fxl_fail(ctx, FXL_EINVAL,
                            "file '%s': its DICOM file meta information has no Transfer Syntax UID (0002,0010)",
                            name);
        if (!accepted_xfer(xfer))
            return fxl_fail(ctx, FXL_EINVAL,
                            "file '%s' is written in transfer syntax '%.64s' (%s): only implicit VR little "
                            "endian, explicit VR little endian and deflated explicit VR little endian are read",
                            name, xfer.c_str(), dcmFindNameOfUID(xfer.c_str(), "unknown transfer syntax"));
        DcmDataset *ds = nullptr;
        if (xfer == UID_DeflatedExplicitVRLittleEndianTransferSyntax) {
            /* Inflated here with a bound, then read as explicit VR little
             * endian: the data set starts after the preamble, the magic and
             * the meta group, whose length (0002,0000) says where. */
            Uint32 group_len = 0;
            std::string plain;
            const char *why;
            if (meta->findAndGetUint32(DCM_FileMetaInformationGroupLength, group_len).bad())
                return fxl_fail(ctx, FXL_EINVAL,
                                "file '%s': its DICOM file meta information has no File Meta Information Group "
                                "Length (0002,0000)",
                                name);
            size_t start = FXL_DICOM_PREAMBLE_LEN + 4 + 12 + static_cast<size_t>(group_len);
            if (start > len)
                return fxl_fail(ctx, FXL_EINVAL, "file '%s' is cut short: it ends inside its file meta information",
                                name);
            if ((why = inflate_raw(data + start, len - start, plain)) != nullptr)
                return fxl_fail(ctx, FXL_EINVAL, "file '%s': %s", name, why);
            ScanResult inner_scan = scan_elements(reinterpret_cast<const unsigned char *>(plain.data()), 0,
                                                  plain.size(), true, false);
            if (inner_scan.why)
                return scan_refusal(ctx, name, inner_scan);
            if (!inner.write(reinterpret_cast<const unsigned char *>(plain.data()), plain.size()))
                return fxl_fail(ctx, FXL_EIO, "cannot read DICOM file '%s': no temporary file for DCMTK (TMPDIR)",
                                name);
            st = inflated.loadFile(inner.path(), EXS_LittleEndianExplicit, EGL_noChange, DCM_MaxReadLength);
            ds = &inflated;
        } else {
            ScanResult ds_scan = scan_elements(data, meta_scan.end, len, xfer != UID_LittleEndianImplicitTransferSyntax,
                                               false);
            if (ds_scan.why)
                return scan_refusal(ctx, name, ds_scan);
            st = full.loadFile(file.path(), EXS_Unknown, EGL_noChange, DCM_MaxReadLength, ERM_fileOnly);
            ds = full.getDataset();
        }
        if (st.bad())
            return fxl_fail(ctx, FXL_EINVAL, "file '%s' is cut short or damaged: DCMTK stops reading it: %s", name,
                            st.text());
        /* Values DCMTK left in the file are read now, while it exists. */
        if (!ds || ds->loadAllDataIntoMemory().bad())
            return fxl_fail(ctx, FXL_EINVAL, "file '%s' is cut short or damaged: its values cannot be read", name);
        if (ds->card() == 0)
            return fxl_fail(ctx, FXL_EINVAL, "file '%s' holds a DICOM file meta information but no data set",
                            name);
        /* An absent Specific Character Set is the default repertoire (ASCII). */
        if (ds->findAndGetOFStringArray(DCM_SpecificCharacterSet, charset).bad())
            charset = "";
        st = ds->convertToUTF8();
        if (st.bad())
            return fxl_fail(ctx, FXL_EINVAL,
                            "file '%s': its text cannot be converted from Specific Character Set (0008,0005) "
                            "'%.64s' to UTF-8: %s",
                            name, charset.c_str(), st.text());
        if ((rc = dataset_json(ctx, ds, name, text)) != 0)
            return rc;
        /* Bytes outside the declared character set pass DCMTK's conversion
         * unchanged (for the default repertoire above all): refused here. */
        if ((bad = fxl_utf8_invalid_at(text.data(), text.size())) >= 0)
            return fxl_fail(ctx, FXL_EINVAL,
                            "file '%s': a text value holds characters that are not in its Specific Character Set "
                            "(0008,0005) '%.64s'",
                            name, charset.empty() ? "ISO_IR 6, the default" : charset.c_str());
        char *buf = static_cast<char *>(std::malloc(text.size() + 1));
        if (!buf)
            return fxl_fail(ctx, FXL_EIO, "out of memory reading '%s'", name);
        std::memcpy(buf, text.data(), text.size());
        buf[text.size()] = '\0';
        *json = buf;
        *json_len = text.size();
        return 0;
    } catch (const std::bad_alloc &) {
        return fxl_fail(ctx, FXL_EIO, "out of memory reading '%s'", name);
    } catch (...) {
        return fxl_fail(ctx, FXL_EINVAL, "file '%s': DCMTK failed reading it", name);
    }
}
