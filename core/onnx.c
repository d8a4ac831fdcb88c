#include "onnx.h"

#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "fileio.h"
#include "onnx/onnx.pb-c.h"

#define MAX_DIMS_ELEMS (1ull << 31) /* no stem needs more floats in one tensor */

struct onnx_model {
    char path[PATH_MAX];
    char dir[PATH_MAX];
    Onnx__ModelProto *pb;
    int opset;
    int nbound;
    struct onnx_tensor *bound;
};

/* ---- files ------------------------------------------------------------ */

/* Opens dir/loc for reading with every component checked: relative, no
 * "..", no ".", no empty part, no symlink anywhere (O_NOFOLLOW on each). */
static int open_confined(const char *dir, const char *loc, const char *file, const char *tname, struct err *e)
{
    if (!*loc || loc[0] == '/' || strlen(loc) >= PATH_MAX)
        return err_set(e, ST_EFORMAT, "%s: tensor %s: external data location '%s' is not a relative path inside "
                       "the model's folder", file, tname, loc), -1;
    char part[PATH_MAX];
    int fd = open(dir, O_RDONLY | O_DIRECTORY);
    if (fd < 0)
        return err_set(e, ST_EIO, "%s: cannot open the model's folder %s", file, dir), -1;
    const char *p = loc;
    while (fd >= 0) {
        const char *slash = strchr(p, '/');
        size_t n = slash ? (size_t)(slash - p) : strlen(p);
        memcpy(part, p, n);
        part[n] = 0;
        if (n == 0 || strcmp(part, "..") == 0 || strcmp(part, ".") == 0) {
            close(fd);
            return err_set(e, ST_EFORMAT, "%s: tensor %s: external data location '%s' leaves or names the "
                           "model's folder (empty, '.' or '..' part)", file, tname, loc), -1;
        }
        int next = openat(fd, part, O_RDONLY | O_NOFOLLOW | (slash ? O_DIRECTORY : 0));
        int saved = errno;
        close(fd);
        if (next < 0)
            return err_set(e, ST_EIO, "%s: tensor %s: external data '%s': %s", file, tname, loc,
                           saved == ELOOP || saved == ENOTDIR ? "a symbolic link is not followed"
                                                              : strerror(saved)), -1;
        fd = next;
        if (!slash)
            break;
        p = slash + 1;
    }
    return fd;
}

/* ---- tensors ---------------------------------------------------------- */

static float le_float(const uint8_t *p)
{
    uint32_t u = (uint32_t)p[0] | (uint32_t)p[1] << 8 | (uint32_t)p[2] << 16 | (uint32_t)p[3] << 24;
    float f;
    memcpy(&f, &u, sizeof f);
    return f;
}

static const char *entry(const Onnx__TensorProto *t, const char *key)
{
    for (size_t i = 0; i < t->n_external_data; i++)
        if (t->external_data[i]->key && strcmp(t->external_data[i]->key, key) == 0)
            return t->external_data[i]->value ? t->external_data[i]->value : "";
    return NULL;
}

static int parse_size(const char *s, unsigned long long *v)
{
    char *end;
    errno = 0;
    if (!s || !*s || *s == '-')
        return -1;
    *v = strtoull(s, &end, 10);
    return errno || *end ? -1 : 0;
}

static int external_floats(const Onnx__TensorProto *t, const char *dir, const char *file, struct onnx_tensor *o,
                           struct err *e)
{
    const char *loc = entry(t, "location");
    if (!loc)
        return err_set(e, ST_EFORMAT, "%s: tensor %s: external data without a location", file, o->name);
    unsigned long long off = 0, len = (unsigned long long)o->n * 4;
    const char *so = entry(t, "offset"), *sl = entry(t, "length");
    if ((so && parse_size(so, &off)) || (sl && parse_size(sl, &len)))
        return err_set(e, ST_EFORMAT, "%s: tensor %s: external data offset or length is not a number", file,
                       o->name);
    if (len != (unsigned long long)o->n * 4)
        return err_set(e, ST_EFORMAT, "%s: tensor %s: external data length %llu, its shape needs %zu bytes", file,
                       o->name, len, o->n * 4);
    int fd = open_confined(dir, loc, file, o->name, e);
    if (fd < 0)
        return e ? e->code : ST_EIO;
    struct stat st;
    int rc = ST_OK;
    uint8_t *buf = NULL;
    if (fstat(fd, &st) || !S_ISREG(st.st_mode)) {
        rc = err_set(e, ST_EIO, "%s: tensor %s: external data '%s' is not a regular file", file, o->name, loc);
    } else if (off > (unsigned long long)st.st_size || len > (unsigned long long)st.st_size - off) {
        rc = err_set(e, ST_EFORMAT, "%s: tensor %s: external data '%s' has %lld bytes, offset %llu + length %llu "
                     "runs past its end", file, o->name, loc, (long long)st.st_size, off, len);
    } else if (!(buf = malloc(len ? len : 1))) {
        rc = err_set(e, ST_ENOMEM, "%s: tensor %s: out of memory", file, o->name);
    } else {
        size_t got = 0;
        while (got < len) {
            ssize_t r = pread(fd, buf + got, len - got, (off_t)(off + got));
            if (r <= 0) {
                if (r < 0 && errno == EINTR)
                    continue;
                rc = err_set(e, ST_EIO, "%s: tensor %s: reading '%s' failed", file, o->name, loc);
                break;
            }
            got += (size_t)r;
        }
        for (size_t i = 0; rc == ST_OK && i < o->n; i++)
            o->v[i] = le_float(buf + 4 * i);
    }
    free(buf);
    close(fd);
    return rc;
}

/* Decodes a FLOAT TensorProto; dir is where external data lives (NULL: none allowed). */
static int tensor_decode(const Onnx__TensorProto *t, const char *dir, const char *file, struct onnx_tensor *o,
                         struct err *e)
{
    memset(o, 0, sizeof *o);
    snprintf(o->name, sizeof o->name, "%s", t->name ? t->name : "");
    if (!t->has_data_type || t->data_type != ONNX__TENSOR_PROTO__DATA_TYPE__FLOAT)
        return err_set(e, ST_EFORMAT, "%s: tensor %s: data type %d, only FLOAT (1) is supported", file, o->name,
                       t->has_data_type ? (int)t->data_type : 0);
    if (t->n_dims > ONNX_MAX_RANK)
        return err_set(e, ST_EFORMAT, "%s: tensor %s: rank %zu, at most %d", file, o->name, t->n_dims,
                       ONNX_MAX_RANK);
    if (t->segment)
        return err_set(e, ST_EFORMAT, "%s: tensor %s: segmented tensors are not supported", file, o->name);
    unsigned long long n = 1;
    o->rank = (int)t->n_dims;
    for (size_t i = 0; i < t->n_dims; i++) {
        if (t->dims[i] < 0 || (t->dims[i] > 0 && n > MAX_DIMS_ELEMS / (unsigned long long)t->dims[i]))
            return err_set(e, ST_EFORMAT, "%s: tensor %s: dimension %zu is %lld (negative or too large)", file,
                           o->name, i, (long long)t->dims[i]);
        o->dims[i] = t->dims[i];
        n *= (unsigned long long)t->dims[i];
    }
    o->n = (size_t)n;
    o->v = malloc(o->n ? o->n * sizeof *o->v : 1);
    if (!o->v)
        return err_set(e, ST_ENOMEM, "%s: tensor %s: out of memory for %zu floats", file, o->name, o->n);
    int rc = ST_OK;
    if (t->has_data_location && t->data_location == ONNX__TENSOR_PROTO__DATA_LOCATION__EXTERNAL) {
        rc = dir ? external_floats(t, dir, file, o, e)
                 : err_set(e, ST_EFORMAT, "%s: tensor %s: external data is not allowed here", file, o->name);
    } else if (t->has_raw_data) {
        if (t->raw_data.len != o->n * 4)
            rc = err_set(e, ST_EFORMAT, "%s: tensor %s: raw_data has %zu bytes, its shape needs %zu", file,
                         o->name, t->raw_data.len, o->n * 4);
        for (size_t i = 0; rc == ST_OK && i < o->n; i++)
            o->v[i] = le_float(t->raw_data.data + 4 * i);
    } else if (t->n_float_data == o->n) {
        memcpy(o->v, t->float_data, o->n * sizeof *o->v);
    } else {
        rc = err_set(e, ST_EFORMAT, "%s: tensor %s: %zu values stored, its shape needs %zu", file, o->name,
                     t->n_float_data, o->n);
    }
    if (rc)
        onnx_tensor_clear(o);
    return rc;
}

void onnx_tensor_clear(struct onnx_tensor *t)
{
    if (!t)
        return;
    free(t->v);
    memset(t, 0, sizeof *t);
}

int onnx_tensor_load(const char *path, struct onnx_tensor *t, struct err *e)
{
    uint8_t *buf = NULL;
    size_t len = 0;
    memset(t, 0, sizeof *t);
    int rc = fileio_read_path(path, ONNX_MAX_FILE_BYTES, &buf, &len, e);
    if (rc)
        return rc;
    Onnx__TensorProto *pb = onnx__tensor_proto__unpack(NULL, len, buf);
    free(buf);
    if (!pb)
        return err_set(e, ST_EFORMAT, "%s: not a serialised ONNX TensorProto (corrupt or truncated)", path);
    rc = tensor_decode(pb, NULL, path, t, e);
    onnx__tensor_proto__free_unpacked(pb, NULL);
    return rc;
}

/* ---- the model -------------------------------------------------------- */

struct onnx_model *onnx_model_load(const char *path, struct err *e)
{
    uint8_t *buf = NULL;
    size_t len = 0;
    struct onnx_model *m = calloc(1, sizeof *m);
    if (!m) {
        err_set(e, ST_ENOMEM, "%s: out of memory", path);
        return NULL;
    }
    if (strlen(path) >= sizeof m->path) {
        err_set(e, ST_ERANGE, "%s: path too long", path);
        goto fail;
    }
    strcpy(m->path, path);
    strcpy(m->dir, path);
    char *slash = strrchr(m->dir, '/');
    if (slash)
        slash[slash == m->dir] = 0;
    else
        strcpy(m->dir, ".");
    if (fileio_read_path(path, ONNX_MAX_FILE_BYTES, &buf, &len, e))
        goto fail;
    m->pb = onnx__model_proto__unpack(NULL, len, buf);
    free(buf);
    if (!m->pb) {
        err_set(e, ST_EFORMAT, "%s: not an ONNX model (corrupt or truncated protobuf)", path);
        goto fail;
    }
    if (!m->pb->graph || m->pb->graph->n_node == 0) {
        err_set(e, ST_EFORMAT, "%s: the ONNX model has no graph or no nodes (truncated?)", path);
        goto fail;
    }
    m->opset = -1;
    for (size_t i = 0; i < m->pb->n_opset_import; i++) {
        const Onnx__OperatorSetIdProto *o = m->pb->opset_import[i];
        if ((!o->domain || !*o->domain || strcmp(o->domain, "ai.onnx") == 0) && o->has_version)
            m->opset = (int)o->version;
    }
    if (m->opset < 1) {
        err_set(e, ST_EFORMAT, "%s: the model imports no version of the default ONNX operator set", path);
        goto fail;
    }
    return m;
fail:
    onnx_model_free(m);
    return NULL;
}

void onnx_model_free(struct onnx_model *m)
{
    if (!m)
        return;
    if (m->pb)
        onnx__model_proto__free_unpacked(m->pb, NULL);
    for (int i = 0; i < m->nbound; i++)
        onnx_tensor_clear(&m->bound[i]);
    free(m->bound);
    free(m);
}

static const Onnx__TensorProto *find_init(const struct onnx_model *m, const char *name)
{
    const Onnx__GraphProto *g = m->pb->graph;
    for (size_t i = 0; i < g->n_initializer; i++)
        if (g->initializer[i]->name && strcmp(g->initializer[i]->name, name) == 0)
            return g->initializer[i];
    return NULL;
}

static const struct onnx_tensor *find_bound(const struct onnx_model *m, const char *name)
{
    for (int i = 0; i < m->nbound; i++)
        if (strcmp(m->bound[i].name, name) == 0)
            return &m->bound[i];
    return NULL;
}

static int is_const(const struct onnx_model *m, const char *name)
{
    return find_init(m, name) || find_bound(m, name);
}

int onnx_model_ninputs(const struct onnx_model *m)
{
    int n = 0;
    for (size_t i = 0; i < m->pb->graph->n_input; i++)
        n += !find_init(m, m->pb->graph->input[i]->name);
    return n;
}

const char *onnx_model_input(const struct onnx_model *m, int k)
{
    for (size_t i = 0; i < m->pb->graph->n_input; i++)
        if (!find_init(m, m->pb->graph->input[i]->name) && k-- == 0)
            return m->pb->graph->input[i]->name;
    return NULL;
}

const char *onnx_model_output(const struct onnx_model *m, int i)
{
    return i >= 0 && (size_t)i < m->pb->graph->n_output ? m->pb->graph->output[i]->name : NULL;
}

int onnx_model_bind(struct onnx_model *m, const char *name, const struct onnx_tensor *t, struct err *e)
{
    struct onnx_tensor *nb = realloc(m->bound, (size_t)(m->nbound + 1) * sizeof *nb);
    if (!nb)
        return err_set(e, ST_ENOMEM, "%s: out of memory", m->path);
    m->bound = nb;
    struct onnx_tensor *b = &m->bound[m->nbound];
    *b = *t;
    snprintf(b->name, sizeof b->name, "%s", name);
    b->v = malloc(t->n ? t->n * sizeof *b->v : 1);
    if (!b->v)
        return err_set(e, ST_ENOMEM, "%s: out of memory", m->path);
    memcpy(b->v, t->v, t->n * sizeof *b->v);
    m->nbound++;
    return ST_OK;
}

/* A constant's value (caller clears), from a bound input or an initializer. */
static int const_get(const struct onnx_model *m, const char *name, struct onnx_tensor *t, struct err *e)
{
    const struct onnx_tensor *b = find_bound(m, name);
    if (b) {
        *t = *b;
        t->v = malloc(b->n ? b->n * sizeof *t->v : 1);
        if (!t->v)
            return err_set(e, ST_ENOMEM, "%s: out of memory", m->path);
        memcpy(t->v, b->v, b->n * sizeof *t->v);
        return ST_OK;
    }
    const Onnx__TensorProto *p = find_init(m, name);
    if (!p)
        return err_set(e, ST_EFORMAT, "%s: tensor %s is neither an initializer nor a given input", m->path, name);
    return tensor_decode(p, m->dir, m->path, t, e);
}

/* ---- attributes ------------------------------------------------------- */

static const Onnx__AttributeProto *attr(const Onnx__NodeProto *n, const char *name)
{
    for (size_t i = 0; i < n->n_attribute; i++)
        if (n->attribute[i]->name && strcmp(n->attribute[i]->name, name) == 0)
            return n->attribute[i];
    return NULL;
}

static long long attr_int(const Onnx__NodeProto *n, const char *name, long long def)
{
    const Onnx__AttributeProto *a = attr(n, name);
    return a && a->has_i ? a->i : def;
}

static float attr_float(const Onnx__NodeProto *n, const char *name, float def)
{
    const Onnx__AttributeProto *a = attr(n, name);
    return a && a->has_f ? a->f : def;
}

/* Copies a list of ints of exactly `want` values (absent: fill with def). */
static int attr_ints(const Onnx__NodeProto *n, const char *name, int want, int def, int *out, const char *file,
                     struct err *e)
{
    const Onnx__AttributeProto *a = attr(n, name);
    if (!a) {
        for (int i = 0; i < want; i++)
            out[i] = def;
        return ST_OK;
    }
    if (a->n_ints != (size_t)want)
        return err_set(e, ST_EFORMAT, "%s: node %s: attribute %s has %zu values, %d expected (2-D only)", file,
                       n->name ? n->name : "", name, a->n_ints, want);
    for (int i = 0; i < want; i++) {
        if (a->ints[i] < 0 || a->ints[i] > 65536)
            return err_set(e, ST_EFORMAT, "%s: node %s: attribute %s value %lld is out of range", file,
                           n->name ? n->name : "", name, (long long)a->ints[i]);
        out[i] = (int)a->ints[i];
    }
    return ST_OK;
}

static int auto_pad(const Onnx__NodeProto *n, enum onnx_pad *p, const char *file, struct err *e)
{
    const Onnx__AttributeProto *a = attr(n, "auto_pad");
    static const char *const names[] = {"NOTSET", "SAME_UPPER", "SAME_LOWER", "VALID"};
    *p = ONNX_PAD_NOTSET;
    if (!a || !a->has_s)
        return ST_OK;
    for (int i = 0; i < 4; i++)
        if (a->s.len == strlen(names[i]) && memcmp(a->s.data, names[i], a->s.len) == 0) {
            *p = (enum onnx_pad)i;
            return ST_OK;
        }
    return err_set(e, ST_EFORMAT, "%s: node %s: auto_pad '%.*s' is not one of ONNX's four", file,
                   n->name ? n->name : "", (int)(a->s.len > 32 ? 32 : a->s.len), (const char *)a->s.data);
}

/* ---- the cut ---------------------------------------------------------- */

struct memo {
    const char *name;
    int value;
};

struct cut {
    const struct onnx_model *m;
    struct onnx_graph *g;
    int rank;                 /* of the image tensor: 4 (N C H W) or 3 */
    struct memo *memo;
    int nmemo;
    const Onnx__NodeProto **visiting;
    int nvisiting;
    struct err *e;
};

/* A ValueInfoProto's name is optional in onnx.proto (proto2): protobuf-c
 * leaves an absent one NULL (found by tests/fuzz/fuzz_onnx). */
static const char *vi_name(const Onnx__ValueInfoProto *vi)
{
    return vi->name ? vi->name : "";
}

static const char *node_name(const Onnx__NodeProto *n)
{
    return n->name && *n->name ? n->name : (n->n_output ? n->output[0] : "?");
}

static const Onnx__NodeProto *producer(const struct onnx_model *m, const char *name, size_t *which)
{
    const Onnx__GraphProto *g = m->pb->graph;
    for (size_t i = 0; i < g->n_node; i++)
        for (size_t k = 0; k < g->node[i]->n_output; k++)
            if (strcmp(g->node[i]->output[k], name) == 0) {
                *which = k;
                return g->node[i];
            }
    return NULL;
}

/* How many node inputs and graph outputs read tensor name. */
static int uses(const struct onnx_model *m, const char *name)
{
    const Onnx__GraphProto *g = m->pb->graph;
    int n = 0;
    for (size_t i = 0; i < g->n_node; i++)
        for (size_t k = 0; k < g->node[i]->n_input; k++)
            n += strcmp(g->node[i]->input[k], name) == 0;
    for (size_t i = 0; i < g->n_output; i++)
        n += strcmp(vi_name(g->output[i]), name) == 0;
    return n;
}

static int memo_add(struct cut *c, const char *name, int value)
{
    struct memo *nm = realloc(c->memo, (size_t)(c->nmemo + 1) * sizeof *nm);
    if (!nm)
        return err_set(c->e, ST_ENOMEM, "%s: out of memory", c->m->path);
    c->memo = nm;
    c->memo[c->nmemo++] = (struct memo){name, value};
    return ST_OK;
}

static struct onnx_op *op_new(struct cut *c, enum onnx_kind kind, const Onnx__NodeProto *n, int nin)
{
    struct onnx_op *ops = realloc(c->g->ops, (size_t)(c->g->nops + 1) * sizeof *ops);
    if (!ops) {
        err_set(c->e, ST_ENOMEM, "%s: out of memory", c->m->path);
        return NULL;
    }
    c->g->ops = ops;
    struct onnx_op *op = &ops[c->g->nops];
    memset(op, 0, sizeof *op);
    op->in = calloc((size_t)nin, sizeof *op->in);
    if (!op->in) {
        err_set(c->e, ST_ENOMEM, "%s: out of memory", c->m->path);
        return NULL;
    }
    c->g->nops++;
    op->kind = kind;
    op->nin = nin;
    snprintf(op->name, sizeof op->name, "%s", node_name(n));
    op->kh = op->kw = op->sh = op->sw = op->dh = op->dw = 1;
    op->group = 1;
    op->lo = -INFINITY;
    op->hi = INFINITY;
    return op;
}

static int resolve(struct cut *c, const char *name, int *value);

static int conv_weights(struct cut *c, const Onnx__NodeProto *n, struct onnx_op *op)
{
    const char *file = c->m->path;
    struct onnx_tensor w = {0}, b = {0};
    int rc = const_get(c->m, n->input[1], &w, c->e);
    if (rc)
        return rc;
    if (w.rank != 4 || w.dims[0] < 1 || w.dims[1] < 1) {
        rc = err_set(c->e, ST_EFORMAT, "%s: node %s: Conv weight %s must be 4-D (2-D convolution only)", file,
                     op->name, w.name);
        goto out;
    }
    op->cout = (int)w.dims[0];
    int cing = (int)w.dims[1];
    if (op->group < 1 || op->cout % op->group) {
        rc = err_set(c->e, ST_EFORMAT, "%s: node %s: group %d does not divide %d output channels", file, op->name,
                     op->group, op->cout);
        goto out;
    }
    op->cin = cing * op->group;
    int ks[2] = {(int)w.dims[2], (int)w.dims[3]};
    const Onnx__AttributeProto *ka = attr(n, "kernel_shape");
    if (ka && (ka->n_ints != 2 || ka->ints[0] != ks[0] || ka->ints[1] != ks[1])) {
        rc = err_set(c->e, ST_EFORMAT, "%s: node %s: kernel_shape disagrees with the weight's shape", file,
                     op->name);
        goto out;
    }
    op->kh = ks[0];
    op->kw = ks[1];
    c->g->params += (long long)w.n;
    int coutg = op->cout / op->group, kk = op->kh * op->kw * cing;
    /* cache-line aligned: the direct kernel loads 64 bytes per input channel */
    void *wbuf = NULL;
    op->w = posix_memalign(&wbuf, 64, w.n * sizeof *op->w) ? NULL : wbuf;
    op->b = calloc((size_t)op->cout, sizeof *op->b);
    if (!op->w || !op->b) {
        rc = err_set(c->e, ST_ENOMEM, "%s: out of memory", file);
        goto out;
    }
    /* ONNX stores W[co][ci][ky][kx]; GEMM wants per group [(ky kx ci)][co]. */
    for (int co = 0; co < op->cout; co++) {
        int g = co / coutg, col = co % coutg;
        for (int ci = 0; ci < cing; ci++)
            for (int ky = 0; ky < op->kh; ky++)
                for (int kx = 0; kx < op->kw; kx++) {
                    size_t src = (((size_t)co * cing + ci) * op->kh + ky) * op->kw + kx;
                    size_t row = ((size_t)ky * op->kw + kx) * cing + ci;
                    op->w[(size_t)g * kk * coutg + row * coutg + col] = w.v[src];
                }
    }
    if (n->n_input > 2 && *n->input[2]) {
        if ((rc = const_get(c->m, n->input[2], &b, c->e)))
            goto out;
        if (b.n != (size_t)op->cout) {
            rc = err_set(c->e, ST_EFORMAT, "%s: node %s: bias has %zu values for %d output channels", file,
                         op->name, b.n, op->cout);
            goto out;
        }
        memcpy(op->b, b.v, b.n * sizeof *op->b);
        c->g->params += (long long)b.n;
    }
out:
    onnx_tensor_clear(&w);
    onnx_tensor_clear(&b);
    return rc;
}

static int window_attrs(struct cut *c, const Onnx__NodeProto *n, struct onnx_op *op, int conv)
{
    const char *file = c->m->path;
    int k[2] = {op->kh, op->kw}, s[2], d[2];
    int rc;
    if (!conv) {
        const Onnx__AttributeProto *ka = attr(n, "kernel_shape");
        if (!ka)
            return err_set(c->e, ST_EFORMAT, "%s: node %s: kernel_shape is required", file, op->name);
        if ((rc = attr_ints(n, "kernel_shape", 2, 1, k, file, c->e)))
            return rc;
    }
    if ((rc = attr_ints(n, "strides", 2, 1, s, file, c->e)) || (rc = attr_ints(n, "dilations", 2, 1, d, file, c->e)) ||
        (rc = attr_ints(n, "pads", 4, 0, op->pads, file, c->e)) || (rc = auto_pad(n, &op->auto_pad, file, c->e)))
        return rc;
    if (k[0] < 1 || k[1] < 1 || s[0] < 1 || s[1] < 1 || d[0] < 1 || d[1] < 1)
        return err_set(c->e, ST_EFORMAT, "%s: node %s: kernel, strides and dilations must be at least 1", file,
                       op->name);
    /* ONNX orders pads as x1_begin, x2_begin, x1_end, x2_end: top left bottom right */
    op->kh = k[0];
    op->kw = k[1];
    op->sh = s[0];
    op->sw = s[1];
    op->dh = d[0];
    op->dw = d[1];
    op->ceil_mode = (int)attr_int(n, "ceil_mode", 0);
    op->count_include_pad = (int)attr_int(n, "count_include_pad", 0);
    return ST_OK;
}

static int need_inputs(struct cut *c, const Onnx__NodeProto *n, size_t lo, size_t hi)
{
    if (n->n_input < lo || n->n_input > hi)
        return err_set(c->e, ST_EFORMAT, "%s: node %s: %s has %zu inputs, %zu..%zu expected", c->m->path,
                       node_name(n), n->op_type, n->n_input, lo, hi);
    return ST_OK;
}

/* Reads a 1-element constant input (Clip's min and max), keeping def when absent. */
static int scalar_input(struct cut *c, const Onnx__NodeProto *n, size_t i, float *v)
{
    if (n->n_input <= i || !*n->input[i])
        return ST_OK;
    struct onnx_tensor t;
    int rc = const_get(c->m, n->input[i], &t, c->e);
    if (rc)
        return rc;
    if (t.n != 1)
        rc = err_set(c->e, ST_EFORMAT, "%s: node %s: %s must be a single value", c->m->path, node_name(n),
                     n->input[i]);
    else
        *v = t.v[0];
    onnx_tensor_clear(&t);
    return rc;
}

/* The op that wrote value v if it is a Conv whose output nothing else reads
 * and that has no clamp yet, else NULL. */
static struct onnx_op *lone_conv(struct cut *c, int v, const char *tensor)
{
    if (v < 1)
        return NULL;
    struct onnx_op *op = &c->g->ops[v - 1];
    if (op->kind != ONNX_CONV || op->lo != -INFINITY || op->hi != INFINITY || uses(c->m, tensor) != 1 ||
        strcmp(tensor, c->g->output) == 0)
        return NULL;
    return op;
}

static int batchnorm(struct cut *c, const Onnx__NodeProto *n, int *value)
{
    const char *file = c->m->path;
    int rc = need_inputs(c, n, 5, 5), x;
    if (rc)
        return rc;
    if (attr_int(n, "training_mode", 0) != 0 || attr_int(n, "spatial", 1) != 1)
        return err_set(c->e, ST_EFORMAT, "%s: node %s: BatchNormalization in training or non-spatial mode is "
                       "not supported", file, node_name(n));
    for (size_t k = 1; k < n->n_output; k++)
        if (*n->output[k] && uses(c->m, n->output[k]))
            return err_set(c->e, ST_EFORMAT, "%s: node %s: BatchNormalization's running statistics outputs are "
                           "not supported", file, node_name(n));
    if ((rc = resolve(c, n->input[0], &x)))
        return rc;
    float eps = attr_float(n, "epsilon", 1e-5f);
    struct onnx_tensor p[4];
    memset(p, 0, sizeof p);
    for (int i = 0; i < 4 && !rc; i++)
        rc = const_get(c->m, n->input[1 + i], &p[i], c->e);
    size_t ch = p[0].n;
    for (int i = 1; i < 4 && !rc; i++)
        if (p[i].n != ch)
            rc = err_set(c->e, ST_EFORMAT, "%s: node %s: scale, B, mean and var differ in length", file,
                         node_name(n));
    if (rc)
        goto out;
    c->g->params += 4 * (long long)ch;
    struct onnx_op *conv = lone_conv(c, x, n->input[0]);
    if (conv && (size_t)conv->cout == ch) {
        /* y = (W x + b - mean) s + beta with s = scale / sqrt(var + eps) */
        int coutg = conv->cout / conv->group;
        size_t kk = (size_t)conv->kh * conv->kw * (conv->cin / conv->group);
        for (int co = 0; co < conv->cout; co++) {
            double s = p[0].v[co] / sqrt((double)p[3].v[co] + eps);
            float *wg = conv->w + (size_t)(co / coutg) * kk * coutg;
            for (size_t r = 0; r < kk; r++)
                wg[r * coutg + co % coutg] = (float)(wg[r * coutg + co % coutg] * s);
            conv->b[co] = (float)((conv->b[co] - p[2].v[co]) * s + p[1].v[co]);
        }
        *value = x;
        goto out;
    }
    struct onnx_op *op = op_new(c, ONNX_AFFINE, n, 1);
    if (!op) {
        rc = c->e ? c->e->code : ST_ENOMEM;
        goto out;
    }
    op->in[0] = x;
    op->cin = op->cout = (int)ch;
    op->scale = malloc(ch * sizeof *op->scale);
    op->b = malloc(ch * sizeof *op->b);
    if (!op->scale || !op->b) {
        rc = err_set(c->e, ST_ENOMEM, "%s: out of memory", file);
        goto out;
    }
    for (size_t i = 0; i < ch; i++) {
        double s = p[0].v[i] / sqrt((double)p[3].v[i] + eps);
        op->scale[i] = (float)s;
        op->b[i] = (float)(p[1].v[i] - p[2].v[i] * s);
    }
    *value = c->g->nops;
out:
    for (int i = 0; i < 4; i++)
        onnx_tensor_clear(&p[i]);
    return rc;
}

/* Add with one constant operand: keep its (C, H, W) shape for broadcasting. */
static int add_const(struct cut *c, const Onnx__NodeProto *n, struct onnx_op *op, const char *name)
{
    struct onnx_tensor t;
    int rc = const_get(c->m, name, &t, c->e);
    if (rc)
        return rc;
    op->kdims[0] = op->kdims[1] = op->kdims[2] = 1;
    for (int i = 0; i < t.rank; i++) {
        int axis = 3 - t.rank + i; /* right-aligned against (C, H, W) */
        if (axis < 0) {
            if (t.dims[i] != 1)
                rc = err_set(c->e, ST_EFORMAT, "%s: node %s: constant %s does not broadcast over one image",
                             c->m->path, node_name(n), name);
            continue;
        }
        op->kdims[axis] = (int)t.dims[i];
    }
    if (!rc) {
        op->konst = t.v;
        t.v = NULL;
        c->g->params += (long long)t.n;
    }
    onnx_tensor_clear(&t);
    return rc;
}

static int build_node(struct cut *c, const Onnx__NodeProto *n, int *value)
{
    const char *file = c->m->path, *op_type = n->op_type ? n->op_type : "";
    int rc, x;
    if (n->domain && *n->domain && strcmp(n->domain, "ai.onnx") != 0)
        return err_set(c->e, ST_EFORMAT, "%s: node %s: operator %s of domain %s is not supported", file,
                       node_name(n), op_type, n->domain);
    if (strcmp(op_type, "Identity") == 0) {
        if ((rc = need_inputs(c, n, 1, 1)))
            return rc;
        return resolve(c, n->input[0], value);
    }
    if (strcmp(op_type, "BatchNormalization") == 0)
        return batchnorm(c, n, value);
    if (strcmp(op_type, "Conv") == 0) {
        if ((rc = need_inputs(c, n, 2, 3)) || (rc = resolve(c, n->input[0], &x)))
            return rc;
        struct onnx_op *op = op_new(c, ONNX_CONV, n, 1);
        if (!op)
            return c->e ? c->e->code : ST_ENOMEM;
        op->in[0] = x;
        op->group = (int)attr_int(n, "group", 1);
        if ((rc = conv_weights(c, n, op)) || (rc = window_attrs(c, n, op, 1)))
            return rc;
        *value = c->g->nops;
        return ST_OK;
    }
    if (strcmp(op_type, "Relu") == 0 || strcmp(op_type, "Clip") == 0) {
        float lo = 0, hi = INFINITY;
        if (op_type[0] == 'C') {
            lo = -INFINITY;
            if (c->m->opset < 11) {
                lo = attr_float(n, "min", -3.402823466e+38f);
                hi = attr_float(n, "max", 3.402823466e+38f);
            } else if ((rc = scalar_input(c, n, 1, &lo)) || (rc = scalar_input(c, n, 2, &hi))) {
                return rc;
            }
        }
        if ((rc = need_inputs(c, n, 1, op_type[0] == 'C' ? 3 : 1)) || (rc = resolve(c, n->input[0], &x)))
            return rc;
        struct onnx_op *conv = lone_conv(c, x, n->input[0]);
        if (conv) {
            conv->lo = lo;
            conv->hi = hi;
            *value = x;
            return ST_OK;
        }
        struct onnx_op *op = op_new(c, ONNX_CLAMP, n, 1);
        if (!op)
            return c->e ? c->e->code : ST_ENOMEM;
        op->in[0] = x;
        op->lo = lo;
        op->hi = hi;
        *value = c->g->nops;
        return ST_OK;
    }
    if (strcmp(op_type, "MaxPool") == 0 || strcmp(op_type, "AveragePool") == 0) {
        int maxpool = op_type[0] == 'M';
        if ((rc = need_inputs(c, n, 1, 1)) || (rc = resolve(c, n->input[0], &x)))
            return rc;
        if (maxpool && n->n_output > 1 && *n->output[1] && uses(c->m, n->output[1]))
            return err_set(c->e, ST_EFORMAT, "%s: node %s: MaxPool's Indices output is not supported", file,
                           node_name(n));
        struct onnx_op *op = op_new(c, maxpool ? ONNX_MAXPOOL : ONNX_AVGPOOL, n, 1);
        if (!op)
            return c->e ? c->e->code : ST_ENOMEM;
        op->in[0] = x;
        if ((rc = window_attrs(c, n, op, 0)))
            return rc;
        if (!maxpool && (op->dh != 1 || op->dw != 1))
            return err_set(c->e, ST_EFORMAT, "%s: node %s: AveragePool with dilations is not supported", file,
                           node_name(n));
        *value = c->g->nops;
        return ST_OK;
    }
    if (strcmp(op_type, "Add") == 0) {
        if ((rc = need_inputs(c, n, 2, 2)))
            return rc;
        int k0 = is_const(c->m, n->input[0]), k1 = is_const(c->m, n->input[1]);
        if (k0 && k1)
            return err_set(c->e, ST_EFORMAT, "%s: node %s: Add of two constants is not supported", file,
                           node_name(n));
        int a = -1, b = -1;
        if ((!k0 && (rc = resolve(c, n->input[0], &a))) || (!k1 && (rc = resolve(c, n->input[1], &b))))
            return rc;
        struct onnx_op *op = op_new(c, ONNX_ADD, n, 2);
        if (!op)
            return c->e ? c->e->code : ST_ENOMEM;
        op->in[0] = a;
        op->in[1] = b;
        if ((k0 || k1) && (rc = add_const(c, n, op, n->input[k0 ? 0 : 1])))
            return rc;
        *value = c->g->nops;
        return ST_OK;
    }
    if (strcmp(op_type, "Concat") == 0) {
        if ((rc = need_inputs(c, n, 1, 64)))
            return rc;
        const Onnx__AttributeProto *ax = attr(n, "axis");
        long long axis = ax && ax->has_i ? ax->i : 1;
        if (axis < 0)
            axis += c->rank;
        if (axis != c->rank - 3)
            return err_set(c->e, ST_EFORMAT, "%s: node %s: Concat along axis %lld; only the channel axis is "
                           "supported", file, node_name(n), ax && ax->has_i ? (long long)ax->i : 1);
        int vals[64];
        for (size_t i = 0; i < n->n_input; i++) {
            if (is_const(c->m, n->input[i]))
                return err_set(c->e, ST_EFORMAT, "%s: node %s: Concat of a constant is not supported", file,
                               node_name(n));
            if ((rc = resolve(c, n->input[i], &vals[i])))
                return rc;
        }
        struct onnx_op *op = op_new(c, ONNX_CONCAT, n, (int)n->n_input);
        if (!op)
            return c->e ? c->e->code : ST_ENOMEM;
        memcpy(op->in, vals, n->n_input * sizeof *vals);
        *value = c->g->nops;
        return ST_OK;
    }
    return err_set(c->e, ST_EFORMAT, "%s: node %s: operator %s is not supported", file, node_name(n), op_type);
}

/* The value number of tensor name, building what it depends on first. */
static int resolve(struct cut *c, const char *name, int *value)
{
    for (int i = 0; i < c->nmemo; i++)
        if (strcmp(c->memo[i].name, name) == 0) {
            *value = c->memo[i].value;
            return ST_OK;
        }
    const char *file = c->m->path;
    size_t which = 0;
    const Onnx__NodeProto *n = producer(c->m, name, &which);
    if (!n) {
        if (is_const(c->m, name))
            return err_set(c->e, ST_EFORMAT, "%s: tensor %s is a constant where an image-sized input is needed",
                           file, name);
        int found = 0;
        for (size_t i = 0; i < c->m->pb->graph->n_input; i++)
            found |= strcmp(vi_name(c->m->pb->graph->input[i]), name) == 0;
        if (!found)
            return err_set(c->e, ST_EFORMAT, "%s: tensor %s is produced by no node and is no input", file, name);
        if (c->g->input[0] && strcmp(c->g->input, name) != 0)
            return err_set(c->e, ST_EFORMAT, "%s: the cut needs two inputs, %s and %s (only one image input is "
                           "supported)", file, c->g->input, name);
        snprintf(c->g->input, sizeof c->g->input, "%s", name);
        *value = 0;
        return memo_add(c, name, 0);
    }
    if (which != 0)
        return err_set(c->e, ST_EFORMAT, "%s: node %s: its output %zu (%s) is not supported, only the first", file,
                       node_name(n), which, name);
    for (int i = 0; i < c->nvisiting; i++)
        if (c->visiting[i] == n)
            return err_set(c->e, ST_EFORMAT, "%s: node %s: the graph has a cycle", file, node_name(n));
    const Onnx__NodeProto **nv = realloc(c->visiting, (size_t)(c->nvisiting + 1) * sizeof *nv);
    if (!nv)
        return err_set(c->e, ST_ENOMEM, "%s: out of memory", file);
    c->visiting = nv;
    c->visiting[c->nvisiting++] = n;
    int rc = build_node(c, n, value);
    c->nvisiting--;
    return rc ? rc : memo_add(c, name, *value);
}

/* Declared rank and channels of graph input name; rank 4 when not stated. */
static void input_shape(const struct onnx_model *m, const char *name, int *rank, int *channels)
{
    *rank = 4;
    *channels = -1;
    for (size_t i = 0; i < m->pb->graph->n_input; i++) {
        const Onnx__ValueInfoProto *vi = m->pb->graph->input[i];
        if (strcmp(vi_name(vi), name) != 0 || !vi->type || vi->type->value_case != ONNX__TYPE_PROTO__VALUE_TENSOR_TYPE ||
            !vi->type->tensor_type->shape)
            continue;
        const Onnx__TensorShapeProto *s = vi->type->tensor_type->shape;
        if (s->n_dim == 3 || s->n_dim == 4)
            *rank = (int)s->n_dim;
        const Onnx__TensorShapeProto__Dimension *d = s->n_dim >= 3 ? s->dim[s->n_dim - 3] : NULL;
        if (d && d->value_case == ONNX__TENSOR_SHAPE_PROTO__DIMENSION__VALUE_DIM_VALUE && d->dim_value > 0 &&
            d->dim_value < INT_MAX)
            *channels = (int)d->dim_value;
    }
}

struct onnx_graph *onnx_graph_cut(const struct onnx_model *m, const char *output, struct err *e)
{
    struct cut c = {.m = m, .e = e};
    if (!output || !*output)
        output = onnx_model_output(m, 0);
    if (!output) {
        err_set(e, ST_EFORMAT, "%s: the graph names no output and no cut tensor was given", m->path);
        return NULL;
    }
    c.g = calloc(1, sizeof *c.g);
    if (!c.g) {
        err_set(e, ST_ENOMEM, "%s: out of memory", m->path);
        return NULL;
    }
    snprintf(c.g->path, sizeof c.g->path, "%s", m->path);
    snprintf(c.g->output, sizeof c.g->output, "%s", output);
    /* the image input's rank decides which Concat axis is the channel one */
    const char *in0 = onnx_model_input(m, 0);
    int ch;
    if (in0)
        input_shape(m, in0, &c.rank, &ch);
    else
        c.rank = 4;
    int v = -1;
    int rc = resolve(&c, output, &v);
    if (!rc && v == 0)
        rc = err_set(e, ST_EFORMAT, "%s: the cut at %s is the input itself: no operations", m->path, output);
    if (!rc)
        input_shape(m, c.g->input, &c.rank, &c.g->in_channels);
    /* the cut's output must be the last op's value: later ops (built for
     * other branches first) cannot come after it in a DFS post-order */
    if (!rc && v != c.g->nops)
        rc = err_set(e, ST_EFORMAT, "%s: internal order of the cut at %s", m->path, output);
    free(c.memo);
    free(c.visiting);
    if (rc) {
        onnx_graph_free(c.g);
        return NULL;
    }
    return c.g;
}

void onnx_graph_free(struct onnx_graph *g)
{
    if (!g)
        return;
    for (int i = 0; i < g->nops; i++) {
        free(g->ops[i].in);
        free(g->ops[i].w);
        free(g->ops[i].b);
        free(g->ops[i].scale);
        free(g->ops[i].konst);
    }
    free(g->ops);
    free(g);
}
