/* A DICOM Part 10 file (PS3.10) read with DCMTK's dcmdata and
 * written out in the DICOM JSON Model (PS3.18 Annex F) for
 * fxl_dicom_plan_parse, which owns every rule about what an RT Plan must
 * hold. This file only decides what DCMTK may read: the preamble and magic,
 * the transfer syntax (named when refused), a file that DCMTK cannot read to
 * its end, and the character set. No value is taken from the data set here,
 * so an absent attribute stays absent (never DCMTK's default of 0 or "").
 * The C interface is include/fxl/dicom_part10.h; docs/dicom-import.md. */
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

extern "C" int fxl_dicom_part10_detect(const unsigned char *data, size_t len)
{
    return data && len >= FXL_DICOM_PREAMBLE_LEN + 4 &&
           std::memcmp(data + FXL_DICOM_PREAMBLE_LEN, "DICM", 4) == 0;
}

extern "C" int fxl_dicom_part10_to_json(fxl_ctx *ctx, const unsigned char *data, size_t len, const char *source,
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
            if (!inner.write(reinterpret_cast<const unsigned char *>(plain.data()), plain.size()))
                return fxl_fail(ctx, FXL_EIO, "cannot read DICOM file '%s': no temporary file for DCMTK (TMPDIR)",
                                name);
            st = inflated.loadFile(inner.path(), EXS_LittleEndianExplicit, EGL_noChange, DCM_MaxReadLength);
            ds = &inflated;
        } else {
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
