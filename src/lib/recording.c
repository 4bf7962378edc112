/* strandecho: recordings read through libsndfile (any format it reads) and written atomically
 * (WAV/AIFF/W64/RF64/CAF float32, FLAC 24-bit, CSV). Text tables are read by csvread.c. */
#include "strandecho/recording.h"

#include <errno.h>
#include <limits.h>
#include <locale.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/types.h>

#include <sndfile.h>

#include "internal.h"
#include "strandecho/output.h"

/* Bytes of interleaved double samples per libsndfile read/write call. */
#define SE_REC_BLOCK_BYTES ((size_t)1 << 19)
/* Bytes looked at to decide whether an unrecognised file is text. */
#define SE_REC_SNIFF_BYTES 4096
/* Chunks walked in a container header before giving up. */
#define SE_REC_MAX_CHUNKS 4096
/* 24-bit full scale: integer k stands for k / 2^23. */
#define SE_REC_I24_SCALE 8388608.0

typedef enum se_write_kind { SE_WRITE_SOUND, SE_WRITE_CSV } se_write_kind;

typedef struct se_write_format {
    const char *ext;   /* lower case, with the dot */
    int sf_format;     /* libsndfile major | subtype, 0 for CSV */
    const char *name;  /* for messages */
} se_write_format;

static const se_write_format se_write_formats[] = {
    {".wav", SF_FORMAT_WAV | SF_FORMAT_FLOAT, "WAV float32"},
    {".flac", SF_FORMAT_FLAC | SF_FORMAT_PCM_24, "FLAC 24-bit"},
    {".aif", SF_FORMAT_AIFF | SF_FORMAT_FLOAT, "AIFF float32"},
    {".aiff", SF_FORMAT_AIFF | SF_FORMAT_FLOAT, "AIFF float32"},
    {".w64", SF_FORMAT_W64 | SF_FORMAT_FLOAT, "W64 float32"},
    {".rf64", SF_FORMAT_RF64 | SF_FORMAT_FLOAT, "RF64 float32"},
    {".caf", SF_FORMAT_CAF | SF_FORMAT_FLOAT, "CAF float32"},
    {".csv", 0, "CSV"},
};

static int se_ext_is(const char *path, const char *ext);
static const se_write_format *se_write_format_for(const char *path);
static int se_is_text_ext(const char *path);
static int se_sniff_text(const char *path);
static void se_describe_format(int format, char out[48]);
static unsigned se_subtype_bytes(int format);
static uint64_t se_get_le(const unsigned char *p, int n);
static uint64_t se_get_be(const unsigned char *p, int n);
static uint64_t se_header_frames(const char *path, int format, int channels);
static se_status se_check_sample(const char *path, double v, size_t i, unsigned c, se_error *err);
static se_status se_read_known(SNDFILE *snd, const char *path, const SF_INFO *info, int regular,
                               size_t max, se_recording *rec, se_error *err);
static se_status se_read_unknown(SNDFILE *snd, const char *path, const SF_INFO *info, size_t max,
                                 se_recording *rec, se_error *err);
static se_status se_write_sound(se_output *out, const char *path, const se_write_format *wf,
                                const double *const *channels, unsigned nch, size_t frames,
                                double rate, se_error *err);
static se_status se_write_csv(FILE *fp, const char *path, const double *const *channels,
                              unsigned nch, size_t frames, double rate, se_error *err);

/* ---- names and formats ---------------------------------------------------------------------- */

/* Case-insensitive "path ends with ext" (ext in lower case). */
static int se_ext_is(const char *path, const char *ext)
{
    size_t lp = strlen(path), le = strlen(ext), i;
    if (lp <= le)
        return 0;
    for (i = 0; i < le; i++) {
        char ch = path[lp - le + i];
        if (ch >= 'A' && ch <= 'Z')
            ch = (char)(ch - 'A' + 'a');
        if (ch != ext[i])
            return 0;
    }
    return 1;
}

static const se_write_format *se_write_format_for(const char *path)
{
    size_t i;
    if (strcmp(path, "-") == 0)
        return &se_write_formats[sizeof se_write_formats / sizeof se_write_formats[0] - 1];
    for (i = 0; i < sizeof se_write_formats / sizeof se_write_formats[0]; i++)
        if (se_ext_is(path, se_write_formats[i].ext))
            return &se_write_formats[i];
    return NULL;
}

static int se_is_text_ext(const char *path)
{
    return se_ext_is(path, ".csv") || se_ext_is(path, ".tsv") || se_ext_is(path, ".txt");
}

/* 1 when the first bytes of the file look like text: no NUL and no control characters other
 * than tab, CR, LF, FF, VT (bytes >= 0x80 are allowed for UTF-8 headers). */
static int se_sniff_text(const char *path)
{
    unsigned char buf[SE_REC_SNIFF_BYTES];
    size_t n, i;
    FILE *fp = fopen(path, "rb");
    if (fp == NULL)
        return 0;
    n = fread(buf, 1, sizeof buf, fp);
    fclose(fp);
    if (n == 0)
        return 0;
    for (i = 0; i < n; i++) {
        unsigned char b = buf[i];
        if ((b < 0x20 && b != '\t' && b != '\n' && b != '\r' && b != '\f' && b != '\v') || b == 0x7f)
            return 0;
    }
    return 1;
}

static void se_describe_format(int format, char out[48])
{
    static const struct {
        int code;
        const char *name;
    } majors[] = {
        {SF_FORMAT_WAV, "WAV"},     {SF_FORMAT_WAVEX, "WAV"},   {SF_FORMAT_AIFF, "AIFF"},
        {SF_FORMAT_AU, "AU"},       {SF_FORMAT_RAW, "raw"},     {SF_FORMAT_W64, "W64"},
        {SF_FORMAT_RF64, "RF64"},   {SF_FORMAT_FLAC, "FLAC"},   {SF_FORMAT_CAF, "CAF"},
        {SF_FORMAT_OGG, "OGG"},     {SF_FORMAT_NIST, "NIST"},   {SF_FORMAT_IRCAM, "IRCAM"},
        {SF_FORMAT_VOC, "VOC"},     {SF_FORMAT_MAT4, "MAT4"},   {SF_FORMAT_MAT5, "MAT5"},
        {SF_FORMAT_PAF, "PAF"},     {SF_FORMAT_SVX, "8SVX"},    {SF_FORMAT_SD2, "SD2"},
    };
    static const struct {
        int code;
        const char *name;
    } subs[] = {
        {SF_FORMAT_PCM_S8, "8-bit"},      {SF_FORMAT_PCM_U8, "8-bit unsigned"},
        {SF_FORMAT_PCM_16, "16-bit"},     {SF_FORMAT_PCM_24, "24-bit"},
        {SF_FORMAT_PCM_32, "32-bit"},     {SF_FORMAT_FLOAT, "float32"},
        {SF_FORMAT_DOUBLE, "float64"},    {SF_FORMAT_ULAW, "u-law"},
        {SF_FORMAT_ALAW, "A-law"},        {SF_FORMAT_IMA_ADPCM, "IMA ADPCM"},
        {SF_FORMAT_MS_ADPCM, "MS ADPCM"}, {SF_FORMAT_GSM610, "GSM 6.10"},
        {SF_FORMAT_VORBIS, "Vorbis"},
    };
    int major = format & SF_FORMAT_TYPEMASK, sub = format & SF_FORMAT_SUBMASK;
    const char *mname = NULL, *sname = NULL;
    char mbuf[24], sbuf[24];
    size_t i;
    for (i = 0; i < sizeof majors / sizeof majors[0]; i++)
        if (majors[i].code == major)
            mname = majors[i].name;
    for (i = 0; i < sizeof subs / sizeof subs[0]; i++)
        if (subs[i].code == sub)
            sname = subs[i].name;
    if (mname == NULL) {
        SF_FORMAT_INFO fi;
        memset(&fi, 0, sizeof fi);
        fi.format = major;
        if (sf_command(NULL, SFC_GET_FORMAT_INFO, &fi, sizeof fi) == 0 && fi.name != NULL) {
            snprintf(mbuf, sizeof mbuf, "%s", fi.name);
        } else {
            snprintf(mbuf, sizeof mbuf, "type 0x%x", (unsigned)major >> 16);
        }
        mname = mbuf;
    }
    if (sname == NULL) {
        SF_FORMAT_INFO fi;
        memset(&fi, 0, sizeof fi);
        fi.format = sub;
        if (sf_command(NULL, SFC_GET_FORMAT_INFO, &fi, sizeof fi) == 0 && fi.name != NULL)
            snprintf(sbuf, sizeof sbuf, "%s", fi.name);
        else
            snprintf(sbuf, sizeof sbuf, "subtype 0x%x", (unsigned)sub);
        sname = sbuf;
    }
    snprintf(out, 48, "%s %s", mname, sname);
}

/* Bytes per sample of uncompressed subtypes, 0 for compressed ones. */
static unsigned se_subtype_bytes(int format)
{
    switch (format & SF_FORMAT_SUBMASK) {
    case SF_FORMAT_PCM_S8:
    case SF_FORMAT_PCM_U8:
    case SF_FORMAT_ULAW:
    case SF_FORMAT_ALAW:
        return 1;
    case SF_FORMAT_PCM_16:
        return 2;
    case SF_FORMAT_PCM_24:
        return 3;
    case SF_FORMAT_PCM_32:
    case SF_FORMAT_FLOAT:
        return 4;
    case SF_FORMAT_DOUBLE:
        return 8;
    default:
        return 0;
    }
}

/* ---- the header's own frame count ----------------------------------------------------------- */

static uint64_t se_get_le(const unsigned char *p, int n)
{
    uint64_t v = 0;
    while (n-- > 0)
        v = (v << 8) | p[n];
    return v;
}

static uint64_t se_get_be(const unsigned char *p, int n)
{
    uint64_t v = 0;
    int i;
    for (i = 0; i < n; i++)
        v = (v << 8) | p[i];
    return v;
}

/* Frames the container header claims, from its own fields: the data chunk size of RIFF/RIFX WAV,
 * the ds64 data size of RF64/BW64, the data GUID chunk of W64 (divided by the frame size), or the
 * COMM frame count of AIFF/AIFC. 0 when unknown, unparsed or marked "length unknown". libsndfile
 * clips its frame count to the bytes present without an error, so truncation is found here. */
static uint64_t se_header_frames(const char *path, int format, int channels)
{
    int major = format & SF_FORMAT_TYPEMASK;
    uint64_t bpf = (uint64_t)se_subtype_bytes(format) * (uint64_t)channels, claimed = 0;
    unsigned char h[40];
    FILE *fp;
    int k;
    if (major != SF_FORMAT_WAV && major != SF_FORMAT_WAVEX && major != SF_FORMAT_RF64 &&
        major != SF_FORMAT_W64 && major != SF_FORMAT_AIFF)
        return 0;
    if (major != SF_FORMAT_AIFF && bpf == 0)
        return 0;
    fp = fopen(path, "rb");
    if (fp == NULL)
        return 0;
    if (fread(h, 1, 12, fp) != 12)
        goto done;
    if (memcmp(h, "RIFF", 4) == 0 || memcmp(h, "RIFX", 4) == 0) {
        int be = h[3] == 'X';
        for (k = 0; k < SE_REC_MAX_CHUNKS && fread(h, 1, 8, fp) == 8; k++) {
            uint64_t size = be ? se_get_be(h + 4, 4) : se_get_le(h + 4, 4);
            if (memcmp(h, "data", 4) == 0) {
                if (size != 0 && size != 0xffffffffu)
                    claimed = size / bpf;
                break;
            }
            if (size > LONG_MAX - 1 || fseek(fp, (long)(size + (size & 1)), SEEK_CUR) != 0)
                break;
        }
    } else if (memcmp(h, "RF64", 4) == 0 || memcmp(h, "BW64", 4) == 0) {
        /* ds64 comes first: id, size, riffSize (8), dataSize (8), sampleCount (8), ... */
        if (fread(h, 1, 24, fp) == 24 && memcmp(h, "ds64", 4) == 0)
            claimed = se_get_le(h + 16, 8) / bpf;
    } else if (memcmp(h, "riff", 4) == 0) {
        /* W64: 16-byte GUID ids and 8-byte sizes that include the 24-byte chunk header, chunks
         * aligned to 8 bytes; the riff header is 40 bytes. */
        if (fseek(fp, 40, SEEK_SET) == 0) {
            for (k = 0; k < SE_REC_MAX_CHUNKS && fread(h, 1, 24, fp) == 24; k++) {
                uint64_t size = se_get_le(h + 16, 8);
                if (size < 24)
                    break;
                if (memcmp(h, "data", 4) == 0) {
                    claimed = (size - 24) / bpf;
                    break;
                }
                size = (size + 7) & ~(uint64_t)7;
                if (size - 24 > LONG_MAX || fseek(fp, (long)(size - 24), SEEK_CUR) != 0)
                    break;
            }
        }
    } else if (memcmp(h, "FORM", 4) == 0) {
        for (k = 0; k < SE_REC_MAX_CHUNKS && fread(h, 1, 8, fp) == 8; k++) {
            uint64_t size = se_get_be(h + 4, 4);
            if (memcmp(h, "COMM", 4) == 0) {
                /* numChannels (2), numSampleFrames (4), ... */
                if (fread(h, 1, 6, fp) == 6)
                    claimed = se_get_be(h + 2, 4);
                break;
            }
            if (size > LONG_MAX - 1 || fseek(fp, (long)(size + (size & 1)), SEEK_CUR) != 0)
                break;
        }
    }
done:
    fclose(fp);
    return claimed;
}

/* ---- reading -------------------------------------------------------------------------------- */

static se_status se_check_sample(const char *path, double v, size_t i, unsigned c, se_error *err)
{
    if (isnan(v))
        return se_fail(err, SE_ERR_DATA, "%s: sample %zu (channel %u) is NaN", path, i, c + 1);
    if (isinf(v))
        return se_fail(err, SE_ERR_DATA, "%s: sample %zu (channel %u) is %cInf", path, i, c + 1,
                       v > 0 ? '+' : '-');
    return SE_OK;
}

/* Read a file whose frame count libsndfile knows: check the size, allocate once, de-interleave
 * block by block, checking every sample in time order. The header is parsed again only for a
 * regular file (opening a pipe twice would steal its bytes). */
static se_status se_read_known(SNDFILE *snd, const char *path, const SF_INFO *info, int regular,
                               size_t max, se_recording *rec, se_error *err)
{
    unsigned nch = (unsigned)info->channels;
    uint64_t claimed = regular ? se_header_frames(path, info->format, info->channels) : 0;
    size_t frames, bytes, block, got = 0;
    double *buf;
    if ((uint64_t)info->frames > SIZE_MAX ||
        se_mul_size((size_t)info->frames, (size_t)nch * sizeof(double), &bytes) != 0 || bytes > max)
        return se_fail(err, SE_ERR_NOMEM,
                       "%s: %lld frames x %u channels need more than the limit of %zu bytes as "
                       "double",
                       path, (long long)info->frames, nch, max);
    if (claimed > (uint64_t)info->frames)
        return se_fail(err, SE_ERR_FORMAT, "%s: truncated: header says %llu frames, file holds %lld",
                       path, (unsigned long long)claimed, (long long)info->frames);
    frames = (size_t)info->frames;
    rec->data = se_calloc(frames, (size_t)nch * sizeof(double), path, err);
    if (rec->data == NULL)
        return SE_ERR_NOMEM;
    block = SE_REC_BLOCK_BYTES / (nch * sizeof(double));
    if (block == 0)
        block = 1;
    buf = se_calloc(block, (size_t)nch * sizeof(double), "read buffer", err);
    if (buf == NULL)
        return SE_ERR_NOMEM;
    while (got < frames) {
        size_t want = frames - got < block ? frames - got : block, k;
        sf_count_t n = sf_readf_double(snd, buf, (sf_count_t)want);
        unsigned c;
        if (n <= 0)
            break;
        for (k = 0; k < (size_t)n; k++) {
            for (c = 0; c < nch; c++) {
                double v = buf[k * nch + c];
                if (se_check_sample(path, v, got + k, c, err) != SE_OK) {
                    free(buf);
                    return SE_ERR_DATA;
                }
                rec->data[(size_t)c * frames + got + k] = v;
            }
        }
        got += (size_t)n;
    }
    free(buf);
    if (got < frames)
        return se_fail(err, SE_ERR_FORMAT, "%s: truncated: header says %zu frames, file holds %zu",
                       path, frames, got);
    rec->frames = frames;
    return SE_OK;
}

/* Read a stream (a pipe: not seekable) to its end: grow an interleaved buffer within the limit,
 * then transpose to channel-major. A stream's header count is only trusted as the expected length
 * when it fits the limit: streamed headers carry huge "length unknown" markers (libsndfile reports
 * 2^31 - 1 frames for a WAV data size of 0xFFFFFFFF). */
static se_status se_read_unknown(SNDFILE *snd, const char *path, const SF_INFO *info, size_t max,
                                 se_recording *rec, se_error *err)
{
    unsigned nch = (unsigned)info->channels;
    size_t fbytes = (size_t)nch * sizeof(double), cap = 0, got = 0, i;
    double *inter = NULL;
    for (;;) {
        sf_count_t n;
        size_t k;
        unsigned c;
        if (got == cap) {
            size_t ncap = cap == 0 ? 4096 : cap * 2, bytes;
            double *p;
            if (se_mul_size(ncap, fbytes, &bytes) != 0 || bytes > max) {
                ncap = max / fbytes;
                if (ncap <= cap) {
                    free(inter);
                    return se_fail(err, SE_ERR_NOMEM,
                                   "%s: more than %zu frames x %u channels exceed the limit of %zu "
                                   "bytes as double",
                                   path, got, nch, max);
                }
            }
            p = realloc(inter, ncap * fbytes);
            if (p == NULL) {
                free(inter);
                return se_fail(err, SE_ERR_NOMEM, "%s: cannot allocate %zu frames", path, ncap);
            }
            inter = p;
            cap = ncap;
        }
        n = sf_readf_double(snd, inter + got * nch, (sf_count_t)(cap - got));
        if (n <= 0)
            break;
        for (k = 0; k < (size_t)n; k++)
            for (c = 0; c < nch; c++)
                if (se_check_sample(path, inter[(got + k) * nch + c], got + k, c, err) != SE_OK) {
                    free(inter);
                    return SE_ERR_DATA;
                }
        got += (size_t)n;
    }
    if (got == 0) {
        free(inter);
        return se_fail(err, SE_ERR_DATA, "%s: recording holds no samples (0 frames)", path);
    }
    {
        size_t bytes;
        if (info->frames > 0 && (uint64_t)info->frames <= SIZE_MAX &&
            se_mul_size((size_t)info->frames, fbytes, &bytes) == 0 && bytes <= max &&
            got < (size_t)info->frames) {
            free(inter);
            return se_fail(err, SE_ERR_FORMAT,
                           "%s: truncated: header says %lld frames, file holds %zu", path,
                           (long long)info->frames, got);
        }
    }
    rec->data = se_calloc(got, fbytes, path, err);
    if (rec->data == NULL) {
        free(inter);
        return SE_ERR_NOMEM;
    }
    for (i = 0; i < got; i++) {
        unsigned c;
        for (c = 0; c < nch; c++)
            rec->data[(size_t)c * got + i] = inter[i * nch + c];
    }
    free(inter);
    rec->frames = got;
    return SE_OK;
}

/* The header checks of the sound file snd (path, info as sf_open gave them; snd closed on
 * failure) and a new recording with its channels, rate and format. need_frames: the frame count
 * must be known (a probe); else only an empty recording is refused (unknown counts are read to
 * the end). NULL with err filled on failure. */
static se_recording *se_sound_header(SNDFILE *snd, const char *path, const SF_INFO *info,
                                     int need_frames, se_error *err)
{
    se_recording *rec;
    if (info->channels < 1 || info->samplerate <= 0) {
        se_fail(err, SE_ERR_FORMAT, "%s: header gives %d channels at %d Hz", path, info->channels,
                info->samplerate);
        sf_close(snd);
        return NULL;
    }
    if (need_frames ? info->frames <= 0 : info->frames == 0) {
        se_fail(err, SE_ERR_DATA, "%s: recording holds no samples (0 frames)", path);
        sf_close(snd);
        return NULL;
    }
    rec = se_calloc(1, sizeof *rec, "recording", err);
    if (rec == NULL) {
        sf_close(snd);
        return NULL;
    }
    rec->channels = (unsigned)info->channels;
    rec->rate = (double)info->samplerate;
    se_describe_format(info->format, rec->format);
    return rec;
}

se_recording *se_recording_read(const char *path, const se_read_options *opt, se_error *err)
{
    size_t max = (opt != NULL && opt->max_bytes != 0) ? opt->max_bytes : SE_READ_DEFAULT_MAX_BYTES;
    se_recording *rec;
    struct stat st;
    SF_INFO info;
    SNDFILE *snd;
    se_status s;
    if (path == NULL) {
        se_fail(err, SE_ERR_ARG, "recording: NULL path");
        return NULL;
    }
    if (se_is_text_ext(path))
        return se_recording_read_csv(path, opt, err);
    if (stat(path, &st) != 0) {
        se_fail(err, SE_ERR_IO, "%s: cannot open: %s", path, strerror(errno));
        return NULL;
    }
    if (S_ISDIR(st.st_mode)) {
        se_fail(err, SE_ERR_IO, "%s: is a directory, not a recording", path);
        return NULL;
    }
    if (S_ISREG(st.st_mode) && st.st_size == 0) {
        se_fail(err, SE_ERR_FORMAT, "%s: file is empty (0 bytes)", path);
        return NULL;
    }
    memset(&info, 0, sizeof info);
    snd = sf_open(path, SFM_READ, &info);
    if (snd == NULL) {
        char msg[256];
        snprintf(msg, sizeof msg, "%s", sf_strerror(NULL)); /* global in libsndfile: copy now */
        if (S_ISREG(st.st_mode) && se_sniff_text(path))
            return se_recording_read_csv(path, opt, err);
        se_fail(err, SE_ERR_FORMAT, "%s: not a sound file libsndfile reads nor a text table "
                                    "(libsndfile: %s)",
                path, msg);
        return NULL;
    }
    sf_command(snd, SFC_SET_SCALE_FLOAT_INT_READ, NULL, SF_FALSE);
    if ((rec = se_sound_header(snd, path, &info, 0, err)) == NULL)
        return NULL;
    if (info.frames > 0 && info.frames != SF_COUNT_MAX && info.seekable)
        s = se_read_known(snd, path, &info, S_ISREG(st.st_mode), max, rec, err);
    else
        s = se_read_unknown(snd, path, &info, max, rec, err);
    sf_close(snd);
    if (s == SE_OK) {
        rec->path = se_strdup(path, err);
        if (rec->path == NULL)
            s = SE_ERR_NOMEM;
    }
    if (s != SE_OK) {
        se_recording_free(rec);
        return NULL;
    }
    return rec;
}

se_recording *se_recording_probe(const char *path, se_error *err)
{
    se_recording *rec;
    struct stat st;
    SF_INFO info;
    SNDFILE *snd;
    if (path == NULL) {
        se_fail(err, SE_ERR_ARG, "recording: NULL path");
        return NULL;
    }
    if (stat(path, &st) != 0) {
        se_fail(err, SE_ERR_IO, "%s: cannot open: %s", path, strerror(errno));
        return NULL;
    }
    if (S_ISDIR(st.st_mode)) {
        se_fail(err, SE_ERR_IO, "%s: is a directory, not a recording", path);
        return NULL;
    }
    if (se_is_text_ext(path)) {
        se_fail(err, SE_ERR_FORMAT, "%s: a text table is read whole, not streamed", path);
        return NULL;
    }
    memset(&info, 0, sizeof info);
    snd = sf_open(path, SFM_READ, &info);
    if (snd == NULL) {
        char msg[256];
        snprintf(msg, sizeof msg, "%s", sf_strerror(NULL)); /* global in libsndfile: copy now */
        if (S_ISREG(st.st_mode) && st.st_size > 0 && se_sniff_text(path))
            se_fail(err, SE_ERR_FORMAT, "%s: a text table is read whole, not streamed", path);
        else
            se_fail(err, SE_ERR_FORMAT, "%s: not a sound file libsndfile reads (libsndfile: %s)",
                    path, msg);
        return NULL;
    }
    if ((rec = se_sound_header(snd, path, &info, 1, err)) == NULL)
        return NULL;
    rec->frames = (size_t)info.frames;
    sf_close(snd);
    rec->path = se_strdup(path, err);
    if (rec->path == NULL) {
        se_recording_free(rec);
        return NULL;
    }
    return rec;
}

void se_recording_free(se_recording *rec)
{
    if (rec == NULL)
        return;
    free(rec->data);
    free(rec->path);
    free(rec);
}

const double *se_recording_channel(const se_recording *rec, unsigned index0)
{
    if (rec == NULL || rec->data == NULL || index0 >= rec->channels)
        return NULL;
    return rec->data + (size_t)index0 * rec->frames;
}

/* ---- writing -------------------------------------------------------------------------------- */

static se_status se_write_sound(se_output *out, const char *path, const se_write_format *wf,
                                const double *const *channels, unsigned nch, size_t frames,
                                double rate, se_error *err)
{
    int integer = (wf->sf_format & SF_FORMAT_SUBMASK) == SF_FORMAT_PCM_24;
    const char *wpath = se_output_write_path(out);
    size_t block = SE_REC_BLOCK_BYTES / ((size_t)nch * sizeof(double)), done = 0;
    double *dbuf = NULL;
    int *ibuf = NULL;
    SF_INFO info;
    SNDFILE *snd;
    if (block == 0)
        block = 1;
    memset(&info, 0, sizeof info);
    info.samplerate = (int)floor(rate + 0.5);
    info.channels = (int)nch;
    info.format = wf->sf_format;
    if (wpath == NULL)
        return se_fail(err, SE_ERR_ARG, "%s: %s cannot be written to standard output", path,
                       wf->name);
    if (!sf_format_check(&info))
        return se_fail(err, SE_ERR_ARG, "%s: %s cannot hold %u channels at %d Hz", path, wf->name,
                       nch, info.samplerate);
    if (integer)
        ibuf = se_calloc(block, (size_t)nch * sizeof(int), "write buffer", err);
    else
        dbuf = se_calloc(block, (size_t)nch * sizeof(double), "write buffer", err);
    if (ibuf == NULL && dbuf == NULL)
        return SE_ERR_NOMEM;
    snd = sf_open(wpath, SFM_WRITE, &info);
    if (snd == NULL) {
        char msg[256];
        snprintf(msg, sizeof msg, "%s", sf_strerror(NULL)); /* global in libsndfile: copy now */
        free(ibuf);
        free(dbuf);
        return se_fail(err, SE_ERR_IO, "%s: cannot write %s: %s", path, wf->name, msg);
    }
    /* No PEAK chunk: it carries the wall-clock time of writing, and outputs must be
     * byte-identical for the same inputs. */
    sf_command(snd, SFC_SET_ADD_PEAK_CHUNK, NULL, SF_FALSE);
    while (done < frames) {
        size_t n = frames - done < block ? frames - done : block, k;
        sf_count_t wrote;
        unsigned c;
        for (k = 0; k < n; k++) {
            for (c = 0; c < nch; c++) {
                double x = channels[c][done + k];
                if (integer) {
                    /* k / 2^23, k in [-2^23, 2^23 - 1], passed as 32-bit full scale (k * 256):
                     * libsndfile shifts it back down exactly */
                    double q = floor(x * SE_REC_I24_SCALE + 0.5);
                    if (q > SE_REC_I24_SCALE - 1.0)
                        q = SE_REC_I24_SCALE - 1.0;
                    if (q < -SE_REC_I24_SCALE)
                        q = -SE_REC_I24_SCALE;
                    ibuf[k * nch + c] = (int)q * 256;
                } else {
                    dbuf[k * nch + c] = x;
                }
            }
        }
        wrote = integer ? sf_writef_int(snd, ibuf, (sf_count_t)n)
                        : sf_writef_double(snd, dbuf, (sf_count_t)n);
        if (wrote != (sf_count_t)n) {
            char msg[256];
            snprintf(msg, sizeof msg, "%s", sf_strerror(snd));
            sf_close(snd);
            free(ibuf);
            free(dbuf);
            return se_fail(err, SE_ERR_IO, "%s: write failed after %zu frames: %s", path, done,
                           msg);
        }
        done += n;
    }
    free(ibuf);
    free(dbuf);
    if (sf_close(snd) != 0)
        return se_fail(err, SE_ERR_IO, "%s: closing the %s file failed", path, wf->name);
    return SE_OK;
}

static se_status se_write_csv(FILE *fp, const char *path, const double *const *channels,
                              unsigned nch, size_t frames, double rate, se_error *err)
{
    locale_t cloc = newlocale(LC_NUMERIC_MASK, "C", (locale_t)0), old;
    size_t i;
    unsigned c;
    int bad = 0;
    if (cloc == (locale_t)0)
        return se_fail(err, SE_ERR_NOMEM, "%s: cannot create the C locale for writing numbers",
                       path);
    old = uselocale(cloc);
    bad |= fputs("time_s", fp) < 0;
    for (c = 0; c < nch; c++)
        bad |= fprintf(fp, ",ch%u", c) < 0;
    bad |= fputc('\n', fp) == EOF;
    for (i = 0; i < frames && !bad; i++) {
        bad |= fprintf(fp, "%.17g", (double)i / rate) < 0;
        for (c = 0; c < nch; c++)
            bad |= fprintf(fp, ",%.17g", channels[c][i]) < 0;
        bad |= fputc('\n', fp) == EOF;
    }
    uselocale(old);
    freelocale(cloc);
    if (bad)
        return se_fail(err, SE_ERR_IO, "%s: write error: %s", path, strerror(errno));
    return SE_OK;
}

se_status se_recording_write(const char *path, const double *const *channels, unsigned nch,
                             size_t frames, double rate, se_error *err)
{
    const se_write_format *wf;
    se_output *out;
    se_status s;
    size_t i;
    unsigned c;
    if (path == NULL || channels == NULL)
        return se_fail(err, SE_ERR_ARG, "recording write: NULL %s", path == NULL ? "path" : "channels");
    if (nch == 0 || frames == 0)
        return se_fail(err, SE_ERR_ARG, "%s: nothing to write (%u channels, %zu frames)", path, nch,
                       frames);
    if (!(rate > 0.0) || !isfinite(rate))
        return se_fail(err, SE_ERR_ARG, "%s: rate %g Hz is not positive and finite", path, rate);
    wf = se_write_format_for(path);
    if (wf == NULL)
        return se_fail(err, SE_ERR_ARG,
                       "%s: cannot choose a format from the extension (use .wav, .flac, .aif, "
                       ".aiff, .w64, .rf64, .caf or .csv)",
                       path);
    if (wf->sf_format != 0) {
        double r = floor(rate + 0.5);
        if (r < 1.0 || r > (double)INT_MAX || fabs(rate - r) > 1e-9 * rate)
            return se_fail(err, SE_ERR_RANGE, "%s: rate %.17g Hz is not a whole number of Hz in "
                                              "1..%d, which %s stores",
                           path, rate, INT_MAX, wf->name);
    }
    for (c = 0; c < nch; c++) {
        if (channels[c] == NULL)
            return se_fail(err, SE_ERR_ARG, "%s: channel %u is NULL", path, c);
        for (i = 0; i < frames; i++) {
            double x = channels[c][i];
            if (!isfinite(x))
                return se_fail(err, SE_ERR_DATA, "%s: channel %u sample %zu is %s", path, c, i,
                               isnan(x) ? "NaN" : (x > 0 ? "+Inf" : "-Inf"));
            if ((wf->sf_format & SF_FORMAT_SUBMASK) == SF_FORMAT_PCM_24 && fabs(x) > 1.0)
                return se_fail(err, SE_ERR_RANGE,
                               "%s: channel %u sample %zu is %.17g, outside [-1, 1] that %s holds",
                               path, c, i, x, wf->name);
        }
    }
    {
        se_error oerr;
        se_error_clear(&oerr);
        out = se_output_open(path, &oerr);
        if (out == NULL) {
            if (err != NULL)
                *err = oerr;
            return oerr.code;
        }
    }
    if (wf->sf_format == 0)
        s = se_write_csv(se_output_stream(out), path, channels, nch, frames, rate, err);
    else
        s = se_write_sound(out, path, wf, channels, nch, frames, rate, err);
    if (s != SE_OK) {
        se_output_abort(out);
        return s;
    }
    return se_output_commit(out, err);
}
