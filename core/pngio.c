#include "pngio.h"

#include <errno.h>
#include <png.h>
#include <zlib.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Ancillary chunks (text, ICC profiles) are never used, but libpng still
 * allocates them while parsing; a hostile zTXt must not inflate to gigabytes. */
#define PNGIO_CHUNK_MALLOC_MAX (8u * 1024u * 1024u)

enum pngio_mode { PNGIO_RGB, PNGIO_LABEL };

/* Everything a libpng longjmp could leave half-built lives here, in the
 * caller's frame, so the function that calls setjmp modifies no local of its
 * own and cleanup sees every pointer as it was when libpng gave up. */
struct pngio_ctx {
    const char *path;
    FILE *fp;
    png_structp png;
    png_infop info;
    struct image *img;
    int err_no;         /* errno when libpng failed: a short fread/fwrite sets it */
    char msg[160];      /* libpng's error message */
    char warning[160];  /* libpng's last warning: often says why the error came */
    unsigned char *mem; /* pngio_encode_mem's growing output (fp is NULL then) */
    size_t mem_len, mem_cap;
};

static void pngio_on_error(png_structp png, png_const_charp msg)
{
    struct pngio_ctx *c = png_get_error_ptr(png);
    c->err_no = errno;
    snprintf(c->msg, sizeof c->msg, "%s", msg);
    png_longjmp(png, 1);
}

static void pngio_on_warning(png_structp png, png_const_charp msg)
{
    struct pngio_ctx *c = png_get_error_ptr(png);
    snprintf(c->warning, sizeof c->warning, "%s", msg);
}

static int pngio_fail_errno(struct err *e, int code, const char *path, const char *what, int err_no)
{
    char buf[128];
    if (strerror_r(err_no, buf, sizeof buf) != 0)
        snprintf(buf, sizeof buf, "error %d", err_no);
    return err_set(e, code, "%s: %s: %s", path, what, buf);
}

/* Turns the libpng failure recorded in c into one message.  A stdio error is
 * an I/O problem, end of file is truncation, anything else is what libpng
 * says is wrong with the data. */
static int pngio_fail_lib(const struct pngio_ctx *c, struct err *e, int code, const char *what,
                          const char *io_what)
{
    if (c->fp && ferror(c->fp))
        return pngio_fail_errno(e, ST_EIO, c->path, io_what, c->err_no);
    if (c->fp && feof(c->fp))
        what = "truncated PNG (file ends early)";
    if (c->warning[0])
        return err_set(e, code, "%s: %s (libpng: %s; %s)", c->path, what, c->warning, c->msg);
    return err_set(e, code, "%s: %s (libpng: %s)", c->path, what, c->msg);
}

static const char *pngio_color_name(int type)
{
    switch (type) {
    case PNG_COLOR_TYPE_GRAY: return "grey";
    case PNG_COLOR_TYPE_PALETTE: return "palette";
    case PNG_COLOR_TYPE_RGB: return "RGB";
    case PNG_COLOR_TYPE_GRAY_ALPHA: return "grey+alpha";
    case PNG_COLOR_TYPE_RGB_ALPHA: return "RGBA";
    default: return "unknown colour type";
    }
}

static int pngio_open_read(struct pngio_ctx *c, struct err *e)
{
    c->fp = fopen(c->path, "rb");
    if (!c->fp)
        return pngio_fail_errno(e, ST_EIO, c->path, "cannot open", errno);
    png_byte sig[8];
    size_t got = fread(sig, 1, sizeof sig, c->fp);
    if (got < sizeof sig && ferror(c->fp))
        return pngio_fail_errno(e, ST_EIO, c->path, "cannot read", errno);
    if (got < sizeof sig || png_sig_cmp(sig, 0, sizeof sig) != 0)
        return err_set(e, ST_EFORMAT, "%s: not a PNG file", c->path);
    c->png = png_create_read_struct(PNG_LIBPNG_VER_STRING, c, pngio_on_error, pngio_on_warning);
    if (c->png)
        c->info = png_create_info_struct(c->png);
    if (!c->info)
        return err_set(e, ST_ENOMEM, "%s: out of memory starting the PNG decoder", c->path);
    return ST_OK;
}

/* All libpng read calls; may longjmp back to pngio_read_run. */
static int pngio_decode(struct pngio_ctx *c, enum pngio_mode mode, struct err *e)
{
    png_structp png = c->png;
    png_infop info = c->info;
    png_init_io(png, c->fp);
    png_set_sig_bytes(png, 8);
    /* The size is judged by image_new below, before libpng allocates a row,
     * so the message says what is wrong ("image size 20000x20000 outside
     * 1..16384") instead of libpng's user-limit error; PNG's own bound keeps
     * the casts to int exact. */
    png_set_user_limits(png, PNG_UINT_31_MAX, PNG_UINT_31_MAX);
    png_set_chunk_malloc_max(png, PNGIO_CHUNK_MALLOC_MAX);
    png_read_info(png, info);

    png_uint_32 w, h;
    int depth, type;
    png_get_IHDR(png, info, &w, &h, &depth, &type, NULL, NULL, NULL);
    int channels = 3;
    if (mode == PNGIO_LABEL) {
        if ((type != PNG_COLOR_TYPE_GRAY && type != PNG_COLOR_TYPE_PALETTE) || depth > 8)
            return err_set(e, ST_EFORMAT,
                           "%s: label mask must be grey or palette of at most 8 bits (found %d-bit %s)",
                           c->path, depth, pngio_color_name(type));
        /* Unpack 1/2/4-bit samples to one byte each without scaling, so the
         * byte is the class index that was stored. */
        png_set_packing(png);
        channels = 1;
    } else {
        /* Transparency is dropped, not composited: inspection needs the
         * colours the camera saw, and a background would be invented. */
        png_set_expand(png);
        png_set_strip_16(png);
        png_set_strip_alpha(png);
        png_set_gray_to_rgb(png);
    }
    int passes = png_set_interlace_handling(png);

    /* Each side is at most PNG_UINT_31_MAX, so the casts are exact; image_new
     * checks the sides and the pixel count before allocating. */
    struct err sub;
    c->img = image_new((int)w, (int)h, channels, &sub);
    if (!c->img)
        return err_set(e, sub.code, "%s: %s", c->path, sub.msg);
    png_read_update_info(png, info);
    size_t stride = (size_t)w * (size_t)channels;
    size_t rowbytes = png_get_rowbytes(png, info);
    if (rowbytes != stride)
        return err_set(e, ST_ELIB, "%s: libpng decodes %zu bytes per row, %zu expected (%d-bit %s)",
                       c->path, rowbytes, stride, depth, pngio_color_name(type));
    for (int p = 0; p < passes; p++)
        for (png_uint_32 y = 0; y < h; y++)
            png_read_row(png, c->img->px + (size_t)y * stride, NULL);
    /* Reading to IEND also catches a file cut after its image data. */
    png_read_end(png, NULL);
    return ST_OK;
}

static int pngio_read_run(struct pngio_ctx *c, enum pngio_mode mode, struct err *e)
{
    if (setjmp(png_jmpbuf(c->png)))
        return pngio_fail_lib(c, e, ST_EFORMAT, "truncated or corrupt PNG", "cannot read");
    return pngio_decode(c, mode, e);
}

static int pngio_check_labels(const struct image *img, int nclasses, const char *path, struct err *e)
{
    if (nclasses <= 0)
        return ST_OK;
    size_t n = (size_t)img->w * (size_t)img->h;
    for (size_t i = 0; i < n; i++) {
        int v = img->px[i];
        if (v >= nclasses && v != 255)
            return err_set(e, ST_ERANGE, "%s: label value %d at (%d,%d) is not a class (0..%d) or 255",
                           path, v, (int)(i % (size_t)img->w), (int)(i / (size_t)img->w), nclasses - 1);
    }
    return ST_OK;
}

static int pngio_load(const char *path, enum pngio_mode mode, int nclasses, struct image **out,
                      struct err *e)
{
    if (out)
        *out = NULL;
    if (!path || !out)
        return err_set(e, ST_EINVAL, "pngio: NULL path or output");
    struct pngio_ctx c = { .path = path };
    int rc = pngio_open_read(&c, e);
    if (rc)
        goto fail;
    rc = pngio_read_run(&c, mode, e);
    if (rc)
        goto fail;
    if (mode == PNGIO_LABEL) {
        rc = pngio_check_labels(c.img, nclasses, path, e);
        if (rc)
            goto fail;
    }
    *out = c.img;
    c.img = NULL;
fail:
    png_destroy_read_struct(&c.png, &c.info, NULL);
    if (c.fp)
        fclose(c.fp);
    image_free(c.img);
    return rc;
}

int pngio_load_rgb(const char *path, struct image **out, struct err *e)
{
    return pngio_load(path, PNGIO_RGB, 0, out, e);
}

int pngio_load_label(const char *path, int nclasses, struct image **out, struct err *e)
{
    return pngio_load(path, PNGIO_LABEL, nclasses, out, e);
}

static void pngio_mem_write(png_structp png, png_bytep data, size_t len)
{
    struct pngio_ctx *c = png_get_io_ptr(png);
    if (len > c->mem_cap - c->mem_len) {
        size_t cap = c->mem_cap ? c->mem_cap : 65536;
        while (cap - c->mem_len < len)
            cap *= 2;
        unsigned char *m = realloc(c->mem, cap);
        if (!m)
            png_error(png, "out of memory");
        c->mem = m;
        c->mem_cap = cap;
    }
    memcpy(c->mem + c->mem_len, data, len);
    c->mem_len += len;
}

static void pngio_mem_flush(png_structp png)
{
    (void)png;
}

/* All libpng write calls; may longjmp back to pngio_write_run. */
static void pngio_encode(struct pngio_ctx *c, const struct image *img, int level)
{
    png_structp png = c->png;
    if (c->fp)
        png_init_io(png, c->fp);
    else
        png_set_write_fn(png, c, pngio_mem_write, pngio_mem_flush);
    png_set_IHDR(png, c->info, (png_uint_32)img->w, (png_uint_32)img->h, 8,
                 img->channels == 3 ? PNG_COLOR_TYPE_RGB : PNG_COLOR_TYPE_GRAY, PNG_INTERLACE_NONE,
                 PNG_COMPRESSION_TYPE_DEFAULT, PNG_FILTER_TYPE_DEFAULT);
    png_set_compression_level(png, level);
    /* Sensor noise leaves deflate's string matches little to find: on a
     * simulated 640x480 bench frame run-length matching alone took 20 ms
     * for 479 kB against 26 ms for 550 kB with the default strategy. */
    if (level == 1)
        png_set_compression_strategy(png, Z_RLE);
    /* libpng's adaptive filter choice tries all five filters per row: at
     * level 1 that made a 2048x1536 RGB frame take 420 ms instead of 270 ms
     * with SUB alone, for 4% less size.  Stored (level 0) data gains nothing
     * from filtering. */
    if (level == 0)
        png_set_filter(png, PNG_FILTER_TYPE_BASE, PNG_FILTER_NONE);
    else if (level <= 3)
        png_set_filter(png, PNG_FILTER_TYPE_BASE, PNG_FILTER_SUB);
    png_write_info(png, c->info);
    size_t stride = (size_t)img->w * (size_t)img->channels;
    for (int y = 0; y < img->h; y++)
        png_write_row(png, img->px + (size_t)y * stride);
    png_write_end(png, NULL);
}

static int pngio_write_run(struct pngio_ctx *c, const struct image *img, int level, struct err *e)
{
    if (setjmp(png_jmpbuf(c->png)))
        return pngio_fail_lib(c, e, ST_ELIB, "cannot encode PNG", "cannot write");
    pngio_encode(c, img, level);
    return ST_OK;
}

static int pngio_check_save(const char *path, const struct image *img, int level, struct err *e)
{
    if (!img || !img->px)
        return err_set(e, ST_EINVAL, "%s: no image to save", path);
    struct err sub;
    if (image_check_size(img->w, img->h, img->channels, NULL, &sub))
        return err_set(e, sub.code, "%s: %s", path, sub.msg);
    if (level < 0 || level > 9)
        return err_set(e, ST_EINVAL, "%s: zlib level %d outside 0..9", path, level);
    return ST_OK;
}

/* Creates the encoder in c and runs it; the caller destroys it. */
static int pngio_write(struct pngio_ctx *c, const struct image *img, int level, struct err *e)
{
    c->png = png_create_write_struct(PNG_LIBPNG_VER_STRING, c, pngio_on_error, pngio_on_warning);
    if (c->png)
        c->info = png_create_info_struct(c->png);
    if (!c->info)
        return err_set(e, ST_ENOMEM, "%s: out of memory starting the PNG encoder", c->path);
    return pngio_write_run(c, img, level, e);
}

int pngio_save(const char *path, const struct image *img, int level, struct err *e)
{
    if (!path)
        return err_set(e, ST_EINVAL, "pngio: no path to save to");
    int rc = pngio_check_save(path, img, level, e);
    if (rc)
        return rc;
    struct pngio_ctx c = { .path = path };
    c.fp = fopen(path, "wb");
    if (!c.fp)
        return pngio_fail_errno(e, ST_EIO, path, "cannot create", errno);
    rc = pngio_write(&c, img, level, e);
    png_destroy_write_struct(&c.png, &c.info);
    /* Buffered data reaches the disk only now, so a full disk shows here. */
    if (fclose(c.fp) != 0 && rc == ST_OK)
        rc = pngio_fail_errno(e, ST_EIO, path, "cannot write", errno);
    return rc;
}

int pngio_encode_mem(const char *what, const struct image *img, int level, unsigned char **buf,
                     size_t *len, struct err *e)
{
    *buf = NULL;
    *len = 0;
    int rc = pngio_check_save(what, img, level, e);
    if (rc)
        return rc;
    struct pngio_ctx c = { .path = what };
    rc = pngio_write(&c, img, level, e);
    png_destroy_write_struct(&c.png, &c.info);
    if (rc) {
        free(c.mem);
        return rc;
    }
    *buf = c.mem;
    *len = c.mem_len;
    return ST_OK;
}
