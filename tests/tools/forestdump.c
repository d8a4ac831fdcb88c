/* forestdump: exposes core/forest and core/booster to the reference tests.
 *
 *   forestdump forest MODEL.json X.f32 NFEAT OUT.f32
 *       forest_predict probabilities (float32, n x nclasses)
 *   forestdump classify MODEL.json X.f32 NFEAT THREADS OUT.u8 CONF.f32
 *       forest_classify class and confidence per row
 *   forestdump booster MODEL X.f32 NFEAT NCLASSES OUT.f32
 *       booster_load + booster_predict (XGBoost's C-API predictor)
 *   forestdump train OUT.json|ubj NCLASSES NFEAT X.f32 Y.f32 XVAL.f32 YVAL.f32
 *                    ROUNDS DEPTH ETA SEED THREADS EARLY_STOP
 *       booster_train + booster_save; prints "best_round N best_loss L"
 *
 * Inputs are raw little-endian float32, row-major; the row count follows
 * from the file size.  A library error goes to stderr with exit status 3;
 * a usage or file error exits 2. */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "core/booster.h"
#include "core/forest.h"
#include "tests/tools/toolarg.h"

static int usage(void)
{
    fprintf(stderr, "usage: forestdump forest MODEL X NFEAT OUT | classify MODEL X NFEAT THREADS "
                    "OUT CONF | booster MODEL X NFEAT NCLASSES OUT | train OUT NCLASSES NFEAT X Y "
                    "XVAL YVAL ROUNDS DEPTH ETA SEED THREADS EARLY_STOP\n");
    return 2;
}

/* Reads a whole float32 file; *count receives the number of floats. */
static float *read_floats(const char *path, size_t *count)
{
    FILE *fp = fopen(path, "rb");
    if (!fp) {
        fprintf(stderr, "%s: cannot open\n", path);
        return NULL;
    }
    float *v = NULL;
    long len = -1;
    if (fseek(fp, 0, SEEK_END) == 0)
        len = ftell(fp);
    if (len < 0 || len % 4 != 0 || fseek(fp, 0, SEEK_SET) != 0) {
        fprintf(stderr, "%s: not a float32 file\n", path);
        goto done;
    }
    v = malloc((size_t)len + 4);
    if (!v || fread(v, 1, (size_t)len, fp) != (size_t)len) {
        fprintf(stderr, "%s: cannot read\n", path);
        free(v);
        v = NULL;
        goto done;
    }
    *count = (size_t)len / 4;
done:
    fclose(fp);
    return v;
}

static int write_bytes(const char *path, const void *p, size_t size)
{
    FILE *fp = fopen(path, "wb");
    int ok = fp && fwrite(p, 1, size, fp) == size;
    if (fp && fclose(fp) != 0)
        ok = 0;
    if (!ok)
        fprintf(stderr, "%s: cannot write\n", path);
    return ok ? 0 : 2;
}

/* Reads X and checks it holds whole rows of nfeat. */
static float *read_rows(const char *path, int nfeat, size_t *n)
{
    size_t count = 0;
    float *x = read_floats(path, &count);
    if (x && count % (size_t)nfeat != 0) {
        fprintf(stderr, "%s: %zu floats are not rows of %d\n", path, count, nfeat);
        free(x);
        return NULL;
    }
    *n = count / (size_t)nfeat;
    return x;
}

static int lib_fail(const struct err *e)
{
    fprintf(stderr, "%s\n", e->msg);
    return 3;
}

static int cmd_forest(char **argv, int classify)
{
    int nfeat, threads = 1;
    if (parse_int(argv[3], &nfeat) || nfeat < 1 || (classify && parse_int(argv[4], &threads)))
        return usage();
    struct err e;
    err_clear(&e);
    struct forest *f = NULL;
    size_t n = 0;
    float *x = read_rows(argv[2], nfeat, &n), *out = NULL;
    uint8_t *cls = NULL;
    int rc = 2;
    if (!x)
        goto done;
    if (forest_load(argv[1], &f, &e) != ST_OK) {
        rc = lib_fail(&e);
        goto done;
    }
    size_t k = (size_t)forest_nclasses(f);
    out = malloc((classify ? n : n * k) * sizeof *out + 1);
    cls = malloc(n + 1);
    if (!out || !cls)
        goto done;
    if (!classify) {
        forest_predict(f, x, n, nfeat, out);
        rc = write_bytes(argv[4], out, n * k * sizeof *out);
    } else if (forest_classify(f, x, n, nfeat, threads, cls, out, &e) != ST_OK) {
        rc = lib_fail(&e);
    } else {
        rc = write_bytes(argv[5], cls, n);
        if (rc == 0)
            rc = write_bytes(argv[6], out, n * sizeof *out);
    }
done:
    free(cls);
    free(out);
    free(x);
    forest_free(f);
    return rc;
}

static int cmd_booster(char **argv)
{
    int nfeat, nclasses;
    if (parse_int(argv[3], &nfeat) || nfeat < 1 || parse_int(argv[4], &nclasses) || nclasses < 1)
        return usage();
    struct err e;
    err_clear(&e);
    struct booster *b = NULL;
    size_t n = 0;
    float *x = read_rows(argv[2], nfeat, &n), *out = NULL;
    int rc = 2;
    if (!x)
        goto done;
    out = malloc(n * (size_t)nclasses * sizeof *out + 1);
    if (!out)
        goto done;
    if (booster_load(argv[1], 1, &b, &e) != ST_OK ||
        booster_predict(b, x, n, nfeat, nclasses, out, &e) != ST_OK) {
        rc = lib_fail(&e);
        goto done;
    }
    rc = write_bytes(argv[5], out, n * (size_t)nclasses * sizeof *out);
done:
    free(out);
    free(x);
    booster_free(b);
    return rc;
}

static int cmd_train(char **argv)
{
    int nclasses, nfeat;
    struct booster_params p;
    char *end;
    if (parse_int(argv[2], &nclasses) || parse_int(argv[3], &nfeat) || nfeat < 1 ||
        parse_int(argv[8], &p.rounds) || parse_int(argv[9], &p.depth) ||
        parse_int(argv[11], &p.seed) || parse_int(argv[12], &p.threads) ||
        parse_int(argv[13], &p.early_stop))
        return usage();
    p.eta = strtod(argv[10], &end);
    if (end == argv[10] || *end)
        return usage();
    struct err e;
    err_clear(&e);
    struct booster *b = NULL;
    size_t n = 0, nval = 0, ny = 0, nyval = 0;
    float *x = read_rows(argv[4], nfeat, &n), *y = read_floats(argv[5], &ny);
    float *xval = read_rows(argv[6], nfeat, &nval), *yval = read_floats(argv[7], &nyval);
    int rc = 2;
    if (!x || !y || !xval || !yval)
        goto done;
    if (ny != n || nyval != nval) {
        fprintf(stderr, "label counts %zu, %zu do not match rows %zu, %zu\n", ny, nyval, n, nval);
        goto done;
    }
    int best_round;
    double best_loss;
    if (booster_train(&p, nclasses, x, y, n, xval, yval, nval, nfeat, NULL, NULL, &b, &best_round,
                      &best_loss, &e) != ST_OK ||
        booster_save(b, argv[1], &e) != ST_OK) {
        rc = lib_fail(&e);
        goto done;
    }
    printf("best_round %d best_loss %.17g\n", best_round, best_loss);
    rc = 0;
done:
    booster_free(b);
    free(yval);
    free(xval);
    free(y);
    free(x);
    return rc;
}

int main(int argc, char **argv)
{
    if (argc == 6 && strcmp(argv[1], "forest") == 0)
        return cmd_forest(argv + 1, 0);
    if (argc == 8 && strcmp(argv[1], "classify") == 0)
        return cmd_forest(argv + 1, 1);
    if (argc == 7 && strcmp(argv[1], "booster") == 0)
        return cmd_booster(argv + 1);
    if (argc == 15 && strcmp(argv[1], "train") == 0)
        return cmd_train(argv + 1);
    return usage();
}
