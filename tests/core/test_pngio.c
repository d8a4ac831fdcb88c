/* core/pngio: round trips, a PNG written by PIL, and every refusal path.
 * Files live in a fresh mkdtemp folder removed at the end. */
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <setjmp.h>
#include <cmocka.h>

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "core/pngio.h"
#include "tests/testkit.h"

static int setup(void **state)
{
    (void)state;
    return testkit_scratch_setup("test_pngio");
}

static int teardown(void **state)
{
    (void)state;
    return testkit_scratch_teardown();
}

static void write_bytes(const char *path, const void *data, size_t n)
{
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    assert_int_equal(fwrite(data, 1, n, f), n);
    assert_int_equal(fclose(f), 0);
}

static void assert_msg_names(const struct err *e, const char *path)
{
    size_t n = strlen(path);
    assert_true(strncmp(e->msg, path, n) == 0);
    assert_true(e->msg[n] == ':' && e->msg[n + 1] == ' ');
}

/* 13x9, blue background, a red 'F': no symmetry, so a flip, transpose or
 * channel swap changes the bytes. */
static struct image *make_f(void)
{
    struct err e;
    struct image *img = image_new(13, 9, 3, &e);
    assert_non_null(img);
    for (int y = 0; y < 9; y++)
        for (int x = 0; x < 13; x++) {
            int red = (x == 2 && y >= 1 && y <= 7) || (y == 1 && x >= 2 && x <= 9) ||
                      (y == 4 && x >= 2 && x <= 7);
            uint8_t *p = img->px + ((size_t)y * 13 + x) * 3;
            p[0] = red ? 255 : 0;
            p[1] = 0;
            p[2] = red ? 0 : 255;
        }
    return img;
}

static void test_rgb_round_trip(void **state)
{
    (void)state;
    struct image *img = make_f();
    static const int levels[] = { 0, 1, 6, 9 };
    for (size_t i = 0; i < sizeof levels / sizeof levels[0]; i++) {
        char name[32];
        snprintf(name, sizeof name, "f_%d.png", levels[i]);
        const char *path = testkit_path(name);
        struct err e;
        err_clear(&e);
        assert_int_equal(pngio_save(path, img, levels[i], &e), ST_OK);
        struct image *back = NULL;
        assert_int_equal(pngio_load_rgb(path, &back, &e), ST_OK);
        assert_int_equal(back->w, 13);
        assert_int_equal(back->h, 9);
        assert_int_equal(back->channels, 3);
        assert_memory_equal(back->px, img->px, 13 * 9 * 3);
        image_free(back);
    }
    image_free(img);
}

/* reference: PIL Image.fromarray(a, 'RGB').save(compress_level=9) of the
 * 3x2 image [[red, green, blue], [(10,20,30), (200,100,50), white]]. */
static const unsigned char pil_png[] = {
    0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0x00, 0x00, 0x00, 0x0d, 0x49, 0x48, 0x44, 0x52,
    0x00, 0x00, 0x00, 0x03, 0x00, 0x00, 0x00, 0x02, 0x08, 0x02, 0x00, 0x00, 0x00, 0x12, 0x16, 0xf1,
    0x4d, 0x00, 0x00, 0x00, 0x18, 0x49, 0x44, 0x41, 0x54, 0x78, 0xda, 0x63, 0xf8, 0xcf, 0xc0, 0xc0,
    0x00, 0xc1, 0x5c, 0x22, 0x72, 0x27, 0x52, 0x8c, 0xfe, 0xff, 0xff, 0x0f, 0x00, 0x3c, 0x19, 0x07,
    0x95, 0x07, 0xc2, 0xad, 0x92, 0x00, 0x00, 0x00, 0x00, 0x49, 0x45, 0x4e, 0x44, 0xae, 0x42, 0x60,
    0x82,
};

static void test_reads_pil_file(void **state)
{
    (void)state;
    static const uint8_t want[] = { 255, 0, 0, 0, 255, 0, 0, 0, 255,
                                    10, 20, 30, 200, 100, 50, 255, 255, 255 };
    const char *path = testkit_path("pil.png");
    write_bytes(path, pil_png, sizeof pil_png);
    struct image *img = NULL;
    struct err e;
    assert_int_equal(pngio_load_rgb(path, &img, &e), ST_OK);
    assert_int_equal(img->w, 3);
    assert_int_equal(img->h, 2);
    assert_memory_equal(img->px, want, sizeof want);
    image_free(img);
}

static void test_grey_round_trip(void **state)
{
    (void)state;
    struct err e;
    struct image *img = image_new(7, 5, 1, &e);
    assert_non_null(img);
    for (int i = 0; i < 35; i++)
        img->px[i] = (uint8_t)(i * 7 + (i % 3) * 50);
    const char *path = testkit_path("grey.png");
    assert_int_equal(pngio_save(path, img, 1, &e), ST_OK);

    struct image *label = NULL, *rgb = NULL;
    assert_int_equal(pngio_load_label(path, 0, &label, &e), ST_OK);
    assert_int_equal(label->channels, 1);
    assert_int_equal(label->w, 7);
    assert_int_equal(label->h, 5);
    assert_memory_equal(label->px, img->px, 35);
    /* grey read as RGB repeats the sample in all three channels */
    assert_int_equal(pngio_load_rgb(path, &rgb, &e), ST_OK);
    assert_int_equal(rgb->channels, 3);
    for (int i = 0; i < 35; i++)
        for (int k = 0; k < 3; k++)
            assert_int_equal(rgb->px[i * 3 + k], img->px[i]);
    image_free(label);
    image_free(rgb);
    image_free(img);
}

static long file_size(const char *path)
{
    FILE *f = fopen(path, "rb");
    assert_non_null(f);
    assert_int_equal(fseek(f, 0, SEEK_END), 0);
    long n = ftell(f);
    fclose(f);
    return n;
}

static void test_truncated(void **state)
{
    (void)state;
    struct image *img = make_f();
    struct err e;
    const char *half = testkit_path("half.png");
    const char *noend = testkit_path("noend.png");
    assert_int_equal(pngio_save(half, img, 0, &e), ST_OK);
    assert_int_equal(pngio_save(noend, img, 0, &e), ST_OK);
    long n = file_size(half);
    assert_int_equal(truncate(half, n / 2), 0);
    /* the 12-byte IEND chunk missing: pixels are complete, the file is not */
    assert_int_equal(truncate(noend, n - 12), 0);

    struct image *out = NULL;
    assert_int_equal(pngio_load_rgb(half, &out, &e), ST_EFORMAT);
    assert_null(out);
    assert_int_equal(e.code, ST_EFORMAT);
    assert_msg_names(&e, half);
    assert_non_null(strstr(e.msg, "truncated"));
    assert_int_equal(pngio_load_rgb(noend, &out, &e), ST_EFORMAT);
    assert_null(out);
    assert_msg_names(&e, noend);
    image_free(img);
}

static void test_missing_file(void **state)
{
    (void)state;
    const char *path = testkit_path("does-not-exist.png");
    struct image *out = NULL;
    struct err e;
    char want[256];
    snprintf(want, sizeof want, "%s: cannot open: %s", path, strerror(ENOENT));
    assert_int_equal(pngio_load_rgb(path, &out, &e), ST_EIO);
    assert_null(out);
    assert_string_equal(e.msg, want);
    /* a NULL err is allowed: the status still says what happened */
    assert_int_equal(pngio_load_label(path, 3, &out, NULL), ST_EIO);
}

static void test_not_png(void **state)
{
    (void)state;
    const char *text = testkit_path("text.png");
    const char *empty = testkit_path("empty.png");
    write_bytes(text, "P6\n3 2\n255\nnot a png at all\n", 28);
    write_bytes(empty, "", 0);
    const char *files[] = { text, empty, testkit_dir };
    for (int i = 0; i < 3; i++) {
        struct image *out = NULL;
        struct err e;
        int rc = pngio_load_rgb(files[i], &out, &e);
        assert_null(out);
        assert_msg_names(&e, files[i]);
        if (i < 2) {
            char want[256];
            snprintf(want, sizeof want, "%s: not a PNG file", files[i]);
            assert_int_equal(rc, ST_EFORMAT);
            assert_string_equal(e.msg, want);
        } else {
            /* a folder opens but cannot be read */
            assert_int_equal(rc, ST_EIO);
        }
    }
}

static void test_label_range(void **state)
{
    (void)state;
    struct err e;
    struct image *img = image_new(5, 4, 1, &e);
    assert_non_null(img);
    for (int i = 0; i < 20; i++)
        img->px[i] = (uint8_t)(i % 3);
    img->px[0] = 255;            /* unlabelled: always accepted */
    img->px[2 * 5 + 3] = 9;      /* (x=3, y=2) */
    const char *path = testkit_path("label.png");
    assert_int_equal(pngio_save(path, img, 9, &e), ST_OK);

    struct image *out = NULL;
    char want[256];
    snprintf(want, sizeof want, "%s: label value 9 at (3,2) is not a class (0..2) or 255", path);
    assert_int_equal(pngio_load_label(path, 3, &out, &e), ST_ERANGE);
    assert_null(out);
    assert_string_equal(e.msg, want);
    assert_int_equal(pngio_load_label(path, 10, &out, &e), ST_OK);
    assert_memory_equal(out->px, img->px, 20);
    image_free(out);
    image_free(img);

    /* RGB cannot be a mask: colour conversion would invent class indices */
    struct image *f = make_f();
    const char *rgb = testkit_path("label_rgb.png");
    assert_int_equal(pngio_save(rgb, f, 1, &e), ST_OK);
    out = NULL;
    assert_int_equal(pngio_load_label(rgb, 3, &out, &e), ST_EFORMAT);
    assert_null(out);
    assert_msg_names(&e, rgb);
    image_free(f);
}

/* CRC-32 as in the PNG specification (ISO 3309), bit by bit. */
static uint32_t crc32_png(const unsigned char *p, size_t n)
{
    uint32_t c = 0xffffffffu;
    for (size_t i = 0; i < n; i++) {
        c ^= p[i];
        for (int k = 0; k < 8; k++)
            c = (c >> 1) ^ (0xedb88320u & (0u - (c & 1u)));
    }
    return c ^ 0xffffffffu;
}

static void put32(unsigned char *p, uint32_t v)
{
    p[0] = (unsigned char)(v >> 24);
    p[1] = (unsigned char)(v >> 16);
    p[2] = (unsigned char)(v >> 8);
    p[3] = (unsigned char)v;
}

static unsigned char *put_chunk(unsigned char *p, const char *type, const unsigned char *data,
                                uint32_t n)
{
    put32(p, n);
    memcpy(p + 4, type, 4);
    if (n)
        memcpy(p + 8, data, n);
    put32(p + 8 + n, crc32_png(p + 4, 4 + n));
    return p + 12 + n;
}

/* Signature, an 8-bit RGB IHDR, an empty IDAT (libpng stops reading the
 * header there) and IEND, all with valid CRCs.  There is no image data, so a
 * decoder that went on to allocate and read rows fails with another message. */
static void write_ihdr_only(const char *path, uint32_t w, uint32_t h)
{
    unsigned char f[8 + 25 + 12 + 12] = { 0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n' };
    unsigned char ihdr[13] = { 0 };
    put32(ihdr, w);
    put32(ihdr + 4, h);
    ihdr[8] = 8;  /* bit depth */
    ihdr[9] = 2;  /* RGB */
    unsigned char *p = put_chunk(f + 8, "IHDR", ihdr, sizeof ihdr);
    p = put_chunk(p, "IDAT", NULL, 0);
    p = put_chunk(p, "IEND", NULL, 0);
    assert_int_equal(p - f, sizeof f);
    write_bytes(path, f, sizeof f);
}

static void test_huge_dimensions(void **state)
{
    (void)state;
    /* the CRC routine itself, against the IEND CRC every PNG carries */
    assert_int_equal(crc32_png((const unsigned char *)"IEND", 4), 0xae426082u);
    struct {
        uint32_t w, h;
        int code;
    } cases[] = {
        /* PNG (ISO/IEC 15948, 11.2.2 IHDR): a side is at most 2^31 - 1,
         * so libpng refuses the header itself */
        { 0x80000000u, 1, ST_EFORMAT },
        /* within PNG's bounds, beyond ours: refused by size, before any row */
        { 100000, 100000, ST_ERANGE },
        { IMAGE_MAX_SIDE + 1, 1, ST_ERANGE },
        { IMAGE_MAX_SIDE, IMAGE_MAX_SIDE, ST_ERANGE },  /* sides fit, pixel count does not */
    };
    const char *path = testkit_path("huge.png");
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        write_ihdr_only(path, cases[i].w, cases[i].h);
        struct image *out = NULL;
        struct err e;
        assert_int_equal(pngio_load_rgb(path, &out, &e), cases[i].code);
        assert_null(out);
        assert_msg_names(&e, path);
        if (cases[i].code == ST_ERANGE)
            assert_non_null(strstr(e.msg, cases[i].w == cases[i].h && cases[i].w == IMAGE_MAX_SIDE
                                              ? "pixels"
                                              : "outside 1..16384"));
    }
    /* control: a size within the limits gets past the check and fails only
     * for want of image data */
    write_ihdr_only(path, 64, 32);
    struct image *out = NULL;
    struct err e;
    assert_int_equal(pngio_load_rgb(path, &out, &e), ST_EFORMAT);
    assert_null(out);
    assert_non_null(strstr(e.msg, "libpng"));
}

static void test_save_refusals(void **state)
{
    (void)state;
    struct err e;
    struct image *f = make_f();
    const char *path = testkit_path("refused.png");
    assert_int_equal(pngio_save(path, f, 10, &e), ST_EINVAL);
    assert_msg_names(&e, path);
    assert_int_equal(pngio_save(path, f, -1, &e), ST_EINVAL);
    f->channels = 2;
    assert_int_equal(pngio_save(path, f, 1, &e), ST_EINVAL);
    assert_msg_names(&e, path);
    f->channels = 3;
    assert_int_equal(access(path, F_OK), -1);  /* nothing written for bad arguments */

    char nodir[128];
    snprintf(nodir, sizeof nodir, "%s/no/such/folder.png", testkit_dir);
    assert_int_equal(pngio_save(nodir, f, 1, &e), ST_EIO);
    assert_msg_names(&e, nodir);
    assert_non_null(strstr(e.msg, "cannot create"));

    /* a full disk: /dev/full accepts the open and fails every write */
    if (access("/dev/full", W_OK) == 0) {
        assert_int_equal(pngio_save("/dev/full", f, 0, &e), ST_EIO);
        assert_msg_names(&e, "/dev/full");
        assert_non_null(strstr(e.msg, strerror(ENOSPC)));
    }
    image_free(f);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_rgb_round_trip),
        cmocka_unit_test(test_reads_pil_file),
        cmocka_unit_test(test_grey_round_trip),
        cmocka_unit_test(test_truncated),
        cmocka_unit_test(test_missing_file),
        cmocka_unit_test(test_not_png),
        cmocka_unit_test(test_label_range),
        cmocka_unit_test(test_huge_dimensions),
        cmocka_unit_test(test_save_refusals),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
