/* nn/tape.c: the tape, its ops (forward and backward side by side) and the backward sweep.
 *
 * Every backward accumulates (+=) into the gradients of its inputs, and skips an input whose grad is
 * NULL (a leaf that wants no gradient, or a subgraph that depends on none). */
#include "nn/tape.h"

#include <math.h>
#include <string.h>

#include "nn/core.h"
#include "nn/par.h"

const char *const op_names[] = {
    [OP_LEAF] = "leaf",       [OP_MATMUL] = "matmul", [OP_BIAS_ADD] = "bias_add", [OP_ADD] = "add",
    [OP_SUB] = "sub",         [OP_MUL] = "mul",       [OP_SCALE] = "scale",       [OP_MEAN_SQ] = "mean_sq",
    [OP_SUM_ABS] = "sum_abs", [OP_ACT] = "act",       [OP_DENSE_T] = "dense_t",   [OP_ROWS] = "rows",
    [OP_VSTACK] = "vstack",   [OP_HSTACK] = "hstack", [OP_CUSTOM] = "custom",   [OP_DENSE_SQ_ERR] = "dense_sq_err",
};
_Static_assert(sizeof op_names / sizeof op_names[0] == OP_COUNT, "one name per op");

void tape_init(Tape *t, int max_nodes, size_t arena_bytes) {
    memset(t, 0, sizeof *t);
    t->cap = max_nodes;
    t->nodes = nn_calloc((size_t)max_nodes, sizeof(Node));
    arena_init(&t->arena, arena_bytes);
}

void tape_free(Tape *t) {
    nn_free(t->nodes);
    arena_free(&t->arena);
    memset(t, 0, sizeof *t);
}

void tape_reset(Tape *t) {
    t->n = 0;
    arena_reset(&t->arena);
}

static const char *node_name(const Node *n) {
    return n->op == OP_CUSTOM && n->custom ? n->custom->name : op_names[n->op];
}

void tape_print(const Tape *t, FILE *f) {
    for (int i = 0; i < t->n; i++) {
        const Node *n = &t->nodes[i];
        fprintf(f, "%3d %-10s (%d,%d)%s", i, node_name(n), n->val.rows, n->val.cols, n->grad ? " grad" : "");
        for (int j = 0; j < n->n_in; j++) fprintf(f, " %s%d", j ? "," : "<- ", (int)(n->in[j] - t->nodes));
        fputc('\n', f);
    }
}

/* A new node of shape (rows, cols) with value storage; grad when any input has one. */
static Node *node_new(Tape *t, OpId op, Node **in, int n_in, int rows, int cols, int alloc_val) {
    NN_CHECK(t->n < t->cap, "tape: more than %d nodes (raise max_nodes in tape_init)", t->cap);
    Node *n = &t->nodes[t->n++];
    memset(n, 0, sizeof *n);
    n->op = op;
    n->n_in = n_in;
    int need_grad = 0;
    for (int i = 0; i < n_in; i++) {
        n->in[i] = in[i];
        need_grad |= in[i]->grad != NULL;
    }
    n->val = mat_view(alloc_val ? arena_floats(&t->arena, (long)rows * cols) : NULL, rows, cols);
    n->grad = need_grad && alloc_val ? arena_zeros(&t->arena, (long)rows * cols) : NULL;
    return n;
}

static void check_same(const char *op, Node *a, Node *b) {
    NN_CHECK(a->val.rows == b->val.rows && a->val.cols == b->val.cols, "%s: shapes (%d,%d) and (%d,%d) differ",
             op, a->val.rows, a->val.cols, b->val.rows, b->val.cols);
}

static Mat grad_mat(Node *n) { return mat_view(n->grad, n->val.rows, n->val.cols); }

/* ---- leaves ---------------------------------------------------------------------------------- */

Node *nn_leaf(Tape *t, float *data, float *grad, int rows, int cols) {
    Node *n = node_new(t, OP_LEAF, NULL, 0, rows, cols, 0);
    n->val.d = data;
    n->grad = grad;
    return n;
}

Node *nn_param(Tape *t, ParamSet *ps, int idx) {
    Mat v = params_val(ps, idx), g = params_grad(ps, idx);
    return nn_leaf(t, v.d, g.d, v.rows, v.cols);
}

Node *nn_custom(Tape *t, const CustomOp *op, void *ctx, Node **in, int n_in, int rows, int cols) {
    NN_CHECK(n_in <= 3, "custom op %s: at most 3 inputs", op->name);
    Node *n = node_new(t, OP_CUSTOM, in, n_in, rows, cols, 1);
    n->custom = op;
    n->ctx = ctx;
    return n;
}

/* ---- matmul: c = op(a) op(b) ------------------------------------------------------------------ */

Node *nn_matmul(Tape *t, Node *a, Node *b, int ta, int tb) {
    int m = ta ? a->val.cols : a->val.rows, n = tb ? b->val.rows : b->val.cols;
    Node *in[2] = {a, b};
    Node *c = node_new(t, OP_MATMUL, in, 2, m, n, 1);
    c->ta = ta;
    c->tb = tb;
    mat_gemm(ta, tb, 1.0f, a->val, b->val, 0.0f, c->val);
    return c;
}

static void matmul_backward(Node *c) {
    Node *a = c->in[0], *b = c->in[1];
    Mat dc = grad_mat(c);
    int ta = c->ta, tb = c->tb;
    if (a->grad) { /* d op(a) = dc op(b)^T */
        if (!ta) mat_gemm(0, !tb, 1.0f, dc, b->val, 1.0f, grad_mat(a));
        else mat_gemm(tb, 1, 1.0f, b->val, dc, 1.0f, grad_mat(a));
    }
    if (b->grad) { /* d op(b) = op(a)^T dc */
        if (!tb) mat_gemm(!ta, 0, 1.0f, a->val, dc, 1.0f, grad_mat(b));
        else mat_gemm(1, ta, 1.0f, dc, a->val, 1.0f, grad_mat(b));
    }
}

/* ---- bias add: c = a + 1 b --------------------------------------------------------------------- */

Node *nn_bias_add(Tape *t, Node *a, Node *b) {
    NN_CHECK(b->val.rows == 1 && b->val.cols == a->val.cols, "bias_add: a (%d,%d) and bias (%d,%d)",
             a->val.rows, a->val.cols, b->val.rows, b->val.cols);
    Node *in[2] = {a, b};
    Node *c = node_new(t, OP_BIAS_ADD, in, 2, a->val.rows, a->val.cols, 1);
    for (int i = 0; i < a->val.rows; i++) {
        const float *x = mat_row(a->val, i);
        float *y = mat_row(c->val, i);
        for (int j = 0; j < a->val.cols; j++) y[j] = x[j] + b->val.d[j];
    }
    return c;
}

static void bias_add_backward(Node *c) {
    Node *a = c->in[0], *b = c->in[1];
    long n = mat_size(c->val);
    if (a->grad)
        for (long i = 0; i < n; i++) a->grad[i] += c->grad[i];
    if (b->grad)
        for (int i = 0; i < c->val.rows; i++)
            for (int j = 0; j < c->val.cols; j++) b->grad[j] += c->grad[(long)i * c->val.cols + j];
}

/* ---- elementwise add, sub, mul, scale ---------------------------------------------------------- */

static Node *binary(Tape *t, OpId op, Node *a, Node *b) {
    check_same(op_names[op], a, b);
    Node *in[2] = {a, b};
    Node *c = node_new(t, op, in, 2, a->val.rows, a->val.cols, 1);
    long n = mat_size(c->val);
    const float *x = a->val.d, *y = b->val.d;
    float *z = c->val.d;
    switch (op) {
    case OP_ADD: for (long i = 0; i < n; i++) z[i] = x[i] + y[i]; break;
    case OP_SUB: for (long i = 0; i < n; i++) z[i] = x[i] - y[i]; break;
    case OP_MUL: for (long i = 0; i < n; i++) z[i] = x[i] * y[i]; break;
    default: NN_CHECK(0, "binary: op %s", op_names[op]);
    }
    return c;
}

Node *nn_add(Tape *t, Node *a, Node *b) { return binary(t, OP_ADD, a, b); }
Node *nn_sub(Tape *t, Node *a, Node *b) { return binary(t, OP_SUB, a, b); }
Node *nn_mul(Tape *t, Node *a, Node *b) { return binary(t, OP_MUL, a, b); }

static void binary_backward(Node *c) {
    Node *a = c->in[0], *b = c->in[1];
    long n = mat_size(c->val);
    const float *g = c->grad;
    switch (c->op) {
    case OP_ADD:
        if (a->grad) for (long i = 0; i < n; i++) a->grad[i] += g[i];
        if (b->grad) for (long i = 0; i < n; i++) b->grad[i] += g[i];
        break;
    case OP_SUB:
        if (a->grad) for (long i = 0; i < n; i++) a->grad[i] += g[i];
        if (b->grad) for (long i = 0; i < n; i++) b->grad[i] -= g[i];
        break;
    case OP_MUL:
        if (a->grad) for (long i = 0; i < n; i++) a->grad[i] += g[i] * b->val.d[i];
        if (b->grad) for (long i = 0; i < n; i++) b->grad[i] += g[i] * a->val.d[i];
        break;
    default: NN_CHECK(0, "binary_backward: op %s", op_names[c->op]);
    }
}

Node *nn_scale(Tape *t, Node *a, float alpha) {
    Node *c = node_new(t, OP_SCALE, &a, 1, a->val.rows, a->val.cols, 1);
    c->alpha = alpha;
    long n = mat_size(c->val);
    for (long i = 0; i < n; i++) c->val.d[i] = alpha * a->val.d[i];
    return c;
}

static void scale_backward(Node *c) {
    Node *a = c->in[0];
    long n = mat_size(c->val);
    if (a->grad)
        for (long i = 0; i < n; i++) a->grad[i] += c->alpha * c->grad[i];
}

/* ---- reductions: mean of squares, sum of absolute values --------------------------------------- */

Node *nn_mean_sq(Tape *t, Node *a) {
    Node *c = node_new(t, OP_MEAN_SQ, &a, 1, 1, 1, 1);
    long n = mat_size(a->val);
    double s = 0;
    for (long i = 0; i < n; i++) s += (double)a->val.d[i] * a->val.d[i];
    c->val.d[0] = n ? (float)(s / n) : 0.0f;
    return c;
}

static void mean_sq_backward(Node *c) { /* d mean(a^2) / da = 2 a / n */
    Node *a = c->in[0];
    long n = mat_size(a->val);
    if (!a->grad || n == 0) return;
    float k = 2.0f * c->grad[0] / (float)n;
    for (long i = 0; i < n; i++) a->grad[i] += k * a->val.d[i];
}

Node *nn_sum_abs(Tape *t, Node *a) {
    Node *c = node_new(t, OP_SUM_ABS, &a, 1, 1, 1, 1);
    long n = mat_size(a->val);
    double s = 0;
    for (long i = 0; i < n; i++) s += fabsf(a->val.d[i]);
    c->val.d[0] = (float)s;
    return c;
}

static void sum_abs_backward(Node *c) { /* subgradient sign(a), 0 at 0 */
    Node *a = c->in[0];
    long n = mat_size(a->val);
    if (!a->grad) return;
    float g = c->grad[0];
    for (long i = 0; i < n; i++) a->grad[i] += a->val.d[i] > 0 ? g : a->val.d[i] < 0 ? -g : 0.0f;
}

/* ---- activation -------------------------------------------------------------------------------- */

Node *nn_act(Tape *t, Node *a, ActId act) {
    NN_CHECK(act >= 0 && act < ACT_COUNT, "act: bad activation %d", (int)act);
    Node *c = node_new(t, OP_ACT, &a, 1, a->val.rows, a->val.cols, 1);
    c->act = act;
    ActFn fn = act_table[act].fn;
    long n = mat_size(c->val);
    float d[4];
    for (long i = 0; i < n; i++) {
        fn(a->val.d[i], d);
        c->val.d[i] = d[0];
    }
    return c;
}

static void act_backward(Node *c) {
    Node *a = c->in[0];
    if (!a->grad) return;
    ActFn fn = act_table[c->act].fn;
    long n = mat_size(c->val);
    float d[4];
    for (long i = 0; i < n; i++) {
        fn(a->val.d[i], d);
        a->grad[i] += c->grad[i] * d[1];
    }
}

/* ---- row slices and stacking ------------------------------------------------------------------- */

/* A view: value and gradient alias the input's rows, so backward has nothing to do. */
Node *nn_rows(Tape *t, Node *a, int r0, int n) {
    NN_CHECK(r0 >= 0 && n >= 0 && r0 + n <= a->val.rows, "rows: [%d, %d) outside (%d,%d)", r0, r0 + n,
             a->val.rows, a->val.cols);
    Node *c = node_new(t, OP_ROWS, &a, 1, n, a->val.cols, 0);
    c->r0 = r0;
    c->val.d = a->val.d + (long)r0 * a->val.cols;
    c->grad = a->grad ? a->grad + (long)r0 * a->val.cols : NULL;
    return c;
}

Node *nn_vstack(Tape *t, Node *a, Node *b) {
    NN_CHECK(a->val.cols == b->val.cols, "vstack: (%d,%d) over (%d,%d)", a->val.rows, a->val.cols, b->val.rows,
             b->val.cols);
    Node *in[2] = {a, b};
    Node *c = node_new(t, OP_VSTACK, in, 2, a->val.rows + b->val.rows, a->val.cols, 1);
    memcpy(c->val.d, a->val.d, (size_t)mat_size(a->val) * sizeof(float));
    memcpy(c->val.d + mat_size(a->val), b->val.d, (size_t)mat_size(b->val) * sizeof(float));
    return c;
}

static void vstack_backward(Node *c) {
    Node *a = c->in[0], *b = c->in[1];
    long na = mat_size(a->val), nb = mat_size(b->val);
    if (a->grad) for (long i = 0; i < na; i++) a->grad[i] += c->grad[i];
    if (b->grad) for (long i = 0; i < nb; i++) b->grad[i] += c->grad[na + i];
}

Node *nn_hstack(Tape *t, Node *a, Node *b) {
    NN_CHECK(a->val.rows == b->val.rows, "hstack: (%d,%d) beside (%d,%d)", a->val.rows, a->val.cols, b->val.rows,
             b->val.cols);
    Node *in[2] = {a, b};
    int ca = a->val.cols, cb = b->val.cols;
    Node *c = node_new(t, OP_HSTACK, in, 2, a->val.rows, ca + cb, 1);
    for (int i = 0; i < a->val.rows; i++) {
        memcpy(mat_row(c->val, i), mat_row(a->val, i), (size_t)ca * sizeof(float));
        memcpy(mat_row(c->val, i) + ca, mat_row(b->val, i), (size_t)cb * sizeof(float));
    }
    return c;
}

static void hstack_backward(Node *c) {
    Node *a = c->in[0], *b = c->in[1];
    int ca = a->val.cols, cb = b->val.cols, cc = c->val.cols;
    for (int i = 0; i < c->val.rows; i++) {
        const float *g = c->grad + (long)i * cc;
        if (a->grad) for (int j = 0; j < ca; j++) a->grad[(long)i * ca + j] += g[j];
        if (b->grad) for (int j = 0; j < cb; j++) b->grad[(long)i * cb + j] += g[ca + j];
    }
}

/* ---- the fused dense layer with tangents ------------------------------------------------------- */

/* Rows of a block partition for reductions: column sums and loss sums are first taken over fixed
 * blocks of SUM_ROWS rows, then the block results are combined in block order, so the result does
 * not depend on how par_for split the rows (nor on the thread count). */
enum { SUM_ROWS = 64 };
/* par_for grains: rows of a (rows, n) pass so that a part holds at least `elems` elements. A call
 * costs about 10 us of hand-over to the pool's thread: passes that do a few operations per element
 * split above 64k elements (PAR_LIGHT), the activations with their tangents above 32k (PAR_HEAVY). */
enum { PAR_HEAVY = 32768, PAR_LIGHT = 65536 };
static long row_grain(int n, long elems) { return n >= elems ? 1 : elems / (n > 0 ? n : 1); }

/* db (n) += column sums of M (rows, n), via per-block partial sums in part (blocks, n). */
typedef struct {
    const float *M;
    float *part;
    int rows, n;
} ColSum;

static void colsum_blocks(void *vc, long lo, long hi) {
    ColSum *c = vc;
    for (long blk = lo; blk < hi; blk++) {
        float *restrict p = c->part + blk * c->n;
        long r1 = (blk + 1) * SUM_ROWS < c->rows ? (blk + 1) * SUM_ROWS : c->rows;
        memset(p, 0, (size_t)c->n * sizeof(float));
        for (long r = blk * SUM_ROWS; r < r1; r++) {
            const float *restrict m = c->M + r * c->n;
            for (int j = 0; j < c->n; j++) p[j] += m[j];
        }
    }
}

static void colsum_add(Tape *t, float *db, const float *M, int rows, int n) {
    long blocks = (rows + SUM_ROWS - 1) / SUM_ROWS;
    ColSum c = {M, arena_floats(&t->arena, blocks * n), rows, n};
    par_for(blocks, (row_grain(n, PAR_LIGHT) + SUM_ROWS - 1) / SUM_ROWS, colsum_blocks, &c);
    for (long blk = 0; blk < blocks; blk++)
        for (int j = 0; j < n; j++) db[j] += c.part[blk * n + j];
}

typedef struct {
    float *A, *o;           /* (k*B, n_out) the product (primal rows with bias; in backward, dA), the output */
    const float *g, *b;     /* backward: the output's gradient; forward: the bias */
    long nb;                /* B * n_out */
    int n_out, k;
    ActId act;
} DenseRows;

/* forward over primal rows [lo, hi): a = A + b; out = s(a), s'(a) u, s''(a) u^2 + s'(a) v */
static void dense_fwd_rows(void *vc, long lo, long hi) {
    DenseRows *c = vc;
    ActFn fn = act_table[c->act].fn;
    float *restrict A = c->A, *restrict o = c->o;
    long nb = c->nb;
    int k = c->k, n = c->n_out;
    float d[4];
    for (long r = lo; r < hi; r++)
        for (int j = 0; j < n; j++) {
            long i = r * n + j;
            float a = A[i] + c->b[j];
            A[i] = a;
            fn(a, d);
            o[i] = d[0];
            if (k >= 2) o[nb + i] = d[1] * A[nb + i];
            if (k >= 3) o[2 * nb + i] = d[2] * A[nb + i] * A[nb + i] + d[1] * A[2 * nb + i];
        }
}

/* the same for the sigmoid, written out so that the loops vectorise (same operations, same bits);
 * one function per k, with restrict arguments (the streams never overlap) */
static void sigmoid_fwd1(int n, float *restrict a, const float *restrict b, float *restrict o0) {
    for (int j = 0; j < n; j++) {
        float x = a[j] + b[j];
        a[j] = x;
        o0[j] = act_sigmoid_value(x);
    }
}

static void sigmoid_fwd2(int n, float *restrict a, const float *restrict b, const float *restrict u,
                         float *restrict o0, float *restrict o1) {
    for (int j = 0; j < n; j++) {
        float x = a[j] + b[j];
        a[j] = x;
        float s = act_sigmoid_value(x), s1 = s * (1 - s);
        o0[j] = s;
        o1[j] = s1 * u[j];
    }
}

static void sigmoid_fwd3(int n, float *restrict a, const float *restrict b, const float *restrict u,
                         const float *restrict v, float *restrict o0, float *restrict o1, float *restrict o2) {
    for (int j = 0; j < n; j++) {
        float x = a[j] + b[j];
        a[j] = x;
        float s = act_sigmoid_value(x), s1 = s * (1 - s), s2 = s1 * (1 - 2 * s);
        o0[j] = s;
        o1[j] = s1 * u[j];
        o2[j] = s2 * u[j] * u[j] + s1 * v[j];
    }
}

static void sigmoid_fwd_rows(void *vc, long lo, long hi) {
    DenseRows *c = vc;
    long nb = c->nb;
    int n = c->n_out;
    for (long r = lo; r < hi; r++) {
        float *a = c->A + r * n, *o = c->o + r * n;
        if (c->k == 1) sigmoid_fwd1(n, a, c->b, o);
        else if (c->k == 2) sigmoid_fwd2(n, a, c->b, a + nb, o, o + nb);
        else sigmoid_fwd3(n, a, c->b, a + nb, a + 2 * nb, o, o + nb, o + 2 * nb);
    }
}

static void bias_rows(void *vc, long lo, long hi) {
    DenseRows *c = vc;
    for (long r = lo; r < hi; r++)
        for (int j = 0; j < c->n_out; j++) c->A[r * c->n_out + j] += c->b[j];
}

/* dense_t's pass after its product A (k B, n_out): the bias on the primal rows only, then the
 * activation and the tangents into c's value, one pass over the rows (c->k, c->act set) */
static void dense_act_forward(Node *c, float *A, const float *bias, int B) {
    int n_out = c->val.cols;
    DenseRows dr = {A, c->val.d, NULL, bias, (long)B * n_out, n_out, c->k, c->act};
    par_for(B, row_grain(n_out, c->act == ACT_NONE ? PAR_LIGHT : PAR_HEAVY),
            c->act == ACT_NONE ? bias_rows : c->act == ACT_SIGMOID ? sigmoid_fwd_rows : dense_fwd_rows, &dr);
}

Node *nn_dense_t(Tape *t, Node *h, Node *W, Node *b, int k, ActId act) {
    int rows = h->val.rows, n_out = W->val.cols;
    NN_CHECK(k >= 1 && k <= 3 && rows % k == 0, "dense_t: %d rows do not split into k = %d blocks", rows, k);
    NN_CHECK(h->val.cols == W->val.rows, "dense_t: h (%d,%d) x W (%d,%d)", rows, h->val.cols, W->val.rows,
             n_out);
    NN_CHECK(b->val.rows == 1 && b->val.cols == n_out, "dense_t: bias (%d,%d) for %d outputs", b->val.rows,
             b->val.cols, n_out);
    NN_CHECK(act >= 0 && act < ACT_COUNT, "dense_t: bad activation %d", (int)act);
    Node *in[3] = {h, W, b};
    Node *c = node_new(t, OP_DENSE_T, in, 3, rows, n_out, 1);
    c->k = k;
    c->act = act;
    int B = rows / k;
    /* A = h W, one product over all k*B stacked rows; the linear layer writes straight to out */
    float *A = act == ACT_NONE ? c->val.d : arena_floats(&t->arena, (long)rows * n_out); /* (k*B, n_out) */
    c->saved = A;
    mat_gemm(0, 0, 1.0f, h->val, W->val, 0.0f, mat_view(A, rows, n_out));
    dense_act_forward(c, A, b->val.d, B);
    return c;
}

/* backward over primal rows [lo, hi) (see the formulas above dense_t_backward), in place: element
 * i of each block of A is read before the same element of dA (the same memory) is written */
static void dense_bwd_rows(void *vc, long lo, long hi) {
    DenseRows *c = vc;
    const ActInfo *ai = &act_table[c->act];
    const float *o = c->o, *g = c->g;
    float *A = c->A;
    long nb = c->nb;
    int k = c->k, n = c->n_out;
    float d[4];
    for (long i = lo * n; i < hi * n; i++) {
        if (ai->from_out) ai->from_out(o[i], d);
        else ai->fn(A[i], d);
        float da = g[i] * d[1];
        if (k >= 2) {
            float u = A[nb + i], g1 = g[nb + i];
            da += g1 * d[2] * u;
            float du = g1 * d[1];
            if (k >= 3) {
                float v = A[2 * nb + i], g2 = g[2 * nb + i];
                da += g2 * (d[3] * u * u + d[2] * v);
                du += 2 * g2 * d[2] * u;
                A[2 * nb + i] = g2 * d[1];
            }
            A[nb + i] = du;
        }
        A[i] = da;
    }
}

/* the same for the sigmoid, its derivatives from the output, written out so that the loops
 * vectorise (same operations in the same order, same bits); a, u, v are read and then overwritten
 * by da, du, dv */
static void sigmoid_bwd1(long n, const float *restrict o, const float *restrict g, float *restrict a) {
    for (long i = 0; i < n; i++) {
        float s = o[i];
        a[i] = g[i] * (s * (1 - s));
    }
}

static void sigmoid_bwd2(long n, const float *restrict o, const float *restrict g, const float *restrict g1,
                         float *restrict a, float *restrict u) {
    for (long i = 0; i < n; i++) {
        float s = o[i], s1 = s * (1 - s), s2 = s1 * (1 - 2 * s), ui = u[i];
        a[i] = g[i] * s1 + g1[i] * s2 * ui;
        u[i] = g1[i] * s1;
    }
}

static void sigmoid_bwd3(long n, const float *restrict o, const float *restrict g, const float *restrict g1,
                         const float *restrict g2, float *restrict a, float *restrict u, float *restrict v) {
    for (long i = 0; i < n; i++) {
        float s = o[i], s1 = s * (1 - s), s2 = s1 * (1 - 2 * s), s3 = s1 * (1 - 6 * s + 6 * s * s);
        float ui = u[i], vi = v[i];
        float da = g[i] * s1 + g1[i] * s2 * ui;
        a[i] = da + g2[i] * (s3 * ui * ui + s2 * vi);
        u[i] = g1[i] * s1 + 2 * g2[i] * s2 * ui;
        v[i] = g2[i] * s1;
    }
}

static void sigmoid_bwd_rows(void *vc, long lo, long hi) {
    DenseRows *c = vc;
    long nb = c->nb, i0 = lo * c->n_out, n = (hi - lo) * c->n_out;
    const float *o = c->o + i0, *g = c->g + i0;
    float *A = c->A + i0;
    if (c->k == 1) sigmoid_bwd1(n, o, g, A);
    else if (c->k == 2) sigmoid_bwd2(n, o, g, g + nb, A, A + nb);
    else sigmoid_bwd3(n, o, g, g + nb, g + 2 * nb, A, A + nb, A + 2 * nb);
}

/* The gradient dA (k B, n) of the product before dense_t's activation: the output's gradient for a
 * linear layer, else computed over the saved A in place (c->saved) */
static float *dense_act_backward(Node *c) {
    if (c->act == ACT_NONE) return c->grad;
    int n = c->val.cols, B = c->val.rows / c->k;
    DenseRows dr = {c->saved, c->val.d, c->grad, NULL, (long)B * n, n, c->k, c->act};
    par_for(B, row_grain(n, PAR_HEAVY), c->act == ACT_SIGMOID ? sigmoid_bwd_rows : dense_bwd_rows, &dr);
    return c->saved;
}

/* forward was:  a = (hW)[0:B] + b,  u = (hW)[B:2B],  v = (hW)[2B:3B]
 *               o0 = s(a),  o1 = s'(a) u,  o2 = s''(a) u^2 + s'(a) v
 * so, with g0, g1, g2 the gradients of o0, o1, o2:
 *   dA[0:B]   = da = g0 s'(a) + g1 s''(a) u + g2 (s'''(a) u^2 + s''(a) v)
 *   dA[B:2B]  = du = g1 s'(a) + 2 g2 s''(a) u
 *   dA[2B:3B] = dv = g2 s'(a)
 *   dW += h^T dA,  db += column sums of da,  dh += dA W^T.
 * The derivatives of s come from the output o0 = s(a) when the activation allows (no exp). dA is
 * written over the saved A (dead after this), so backward runs once per recording. */
static void dense_t_backward(Tape *t, Node *c) {
    Node *h = c->in[0], *W = c->in[1], *b = c->in[2];
    int rows = c->val.rows, n_out = c->val.cols, B = rows / c->k;
    float *dA = dense_act_backward(c); /* (k*B, n_out) */
    Mat dAm = mat_view(dA, rows, n_out);
    if (b->grad) colsum_add(t, b->grad, dA, B, n_out);
    if (W->grad) mat_gemm(1, 0, 1.0f, h->val, dAm, 1.0f, grad_mat(W));
    if (h->grad) mat_gemm(0, 1, 1.0f, dAm, W->val, 1.0f, grad_mat(h));
}

/* ---- the first layer over shared frames ------------------------------------------------------- */

typedef struct {
    const int *map;         /* (win B) */
    const float *w1, *w2;   /* (win) stencil weights of x' and x'' */
    int win, B;
} DenseMap;

/* A (k B, n_out) from the products P (U, n_out) of the distinct frames: the centre frame's row, then
 * the stencils' sums over the window, in the order of j (one thread: the same bits on every run) */
static void dense_map_rows(const DenseMap *dm, int k, int n, const float *P, float *A) {
    int B = dm->B, c = dm->win / 2;
    long nb = (long)B * n;
    for (int b = 0; b < B; b++) {
        memcpy(A + (long)b * n, P + (long)dm->map[(long)c * B + b] * n, (size_t)n * sizeof *A);
        for (int q = 1; q < k; q++) {
            const float *w = q == 1 ? dm->w1 : dm->w2;
            float *restrict a = A + q * nb + (long)b * n;
            for (int i = 0; i < n; i++) a[i] = 0;
            for (int j = 0; j < dm->win; j++) {
                const float *restrict p = P + (long)dm->map[(long)j * B + b] * n;
                float wj = w[j];
                for (int i = 0; i < n; i++) a[i] += wj * p[i];
            }
        }
    }
}

/* backward (see nn_dense_t_map in tape.h): dA as dense_t's, then dP = the transpose of the map's
 * sums (in the order of j, then b), dW += F^T dP, dF += dP W^T */
static void dense_map_backward(Tape *t, Node *c) {
    Node *F = c->in[0], *W = c->in[1], *b = c->in[2];
    const DenseMap *dm = c->ctx;
    int rows = c->val.rows, n = c->val.cols, k = c->k, B = rows / k, U = F->val.rows, m = dm->win / 2;
    float *dA = dense_act_backward(c);
    if (b->grad) colsum_add(t, b->grad, dA, B, n);
    float *dP = arena_floats(&t->arena, (long)U * n);
    memset(dP, 0, (size_t)U * n * sizeof *dP);
    long nb = (long)B * n;
    for (int j = 0; j < dm->win; j++)
        for (int r = 0; r < B; r++) {
            float *restrict p = dP + (long)dm->map[(long)j * B + r] * n;
            const float *restrict a = dA + (long)r * n;
            if (j == m)
                for (int i = 0; i < n; i++) p[i] += a[i];
            for (int q = 1; q < k; q++) {
                float wj = (q == 1 ? dm->w1 : dm->w2)[j];
                const float *restrict g = a + q * nb;
                for (int i = 0; i < n; i++) p[i] += wj * g[i];
            }
        }
    Mat dPm = mat_view(dP, U, n);
    if (W->grad) mat_gemm(1, 0, 1.0f, F->val, dPm, 1.0f, grad_mat(W));
    if (F->grad) mat_gemm(0, 1, 1.0f, dPm, W->val, 1.0f, grad_mat(F));
}

static const CustomOp DENSE_MAP_OP = {"dense_t_map", dense_map_backward};

Node *nn_dense_t_map(Tape *t, Node *F, Node *W, Node *b, int k, ActId act, const int *map, int win, const float *w1,
                     const float *w2, int B) {
    int U = F->val.rows, n_out = W->val.cols;
    NN_CHECK(k >= 1 && k <= 3 && win >= 1 && win % 2 == 1 && B >= 1, "dense_t_map: k %d, window %d, %d samples", k,
             win, B);
    NN_CHECK(F->val.cols == W->val.rows, "dense_t_map: F (%d,%d) x W (%d,%d)", U, F->val.cols, W->val.rows, n_out);
    NN_CHECK(b->val.rows == 1 && b->val.cols == n_out, "dense_t_map: bias (%d,%d) for %d outputs", b->val.rows,
             b->val.cols, n_out);
    NN_CHECK(act >= 0 && act < ACT_COUNT, "dense_t_map: bad activation %d", (int)act);
    for (long i = 0; i < (long)win * B; i++)
        NN_CHECK(map[i] >= 0 && map[i] < U, "dense_t_map: map[%ld] = %d of %d frames", i, map[i], U);
    DenseMap *dm = arena_alloc(&t->arena, sizeof *dm);
    *dm = (DenseMap){map, w1, w2, win, B};
    Node *in[3] = {F, W, b};
    Node *c = nn_custom(t, &DENSE_MAP_OP, dm, in, 3, k * B, n_out);
    c->k = k;
    c->act = act;
    float *P = arena_floats(&t->arena, (long)U * n_out);
    mat_gemm(0, 0, 1.0f, F->val, W->val, 0.0f, mat_view(P, U, n_out));
    float *A = act == ACT_NONE ? c->val.d : arena_floats(&t->arena, (long)k * B * n_out);
    c->saved = A;
    dense_map_rows(dm, k, n_out, P, A);
    dense_act_forward(c, A, b->val.d, B);
    return c;
}

/* ---- a linear output layer fused with squared errors ------------------------------------------ */

typedef struct {
    int n_blocks, blocks[3];
    float w[3];
    double mean[3];         /* unweighted mean of each chosen block */
    int B, n_in, n_out;
    int contiguous;         /* the chosen blocks are consecutive: one product each way */
    const float *y;         /* (k*B, n_out) targets */
    const float *b;         /* (n_out) bias */
    float *h;               /* (k*B, n_in) the input */
    float *A;               /* (n_blocks B, n_out) the product; in backward its gradient, in place */
    double *rowsum;         /* (n_blocks B) forward: sum of squared errors of each row */
    float *colpart;         /* backward: (row blocks of block 0, n_out) partial column sums */
    float coef[3];          /* backward: 2 w_i g / (B n_out) */
} SqErr;

/* y row of row r of A */
static const float *sq_err_target(const SqErr *s, long r) {
    return s->y + ((long)s->blocks[r / s->B] * s->B + r % s->B) * s->n_out;
}

/* forward over rows [lo, hi) of A: bias on block 0, then each row's sum of squared errors, in
 * float partial sums of 8 lanes (vectorisable; each row's result is fixed by its data alone) */
static void sq_err_fwd_rows(void *vc, long lo, long hi) {
    SqErr *s = vc;
    int n = s->n_out;
    for (long r = lo; r < hi; r++) {
        float *restrict a = s->A + r * n;
        const float *restrict y = sq_err_target(s, r);
        if (s->blocks[r / s->B] == 0)
            for (int j = 0; j < n; j++) a[j] += s->b[j];
        float acc[8] = {0, 0, 0, 0, 0, 0, 0, 0};
        int j = 0;
        for (; j + 8 <= n; j += 8)
            for (int q = 0; q < 8; q++) {
                float d = a[j + q] - y[j + q];
                acc[q] += d * d;
            }
        double sum = 0;
        for (; j < n; j++) sum += (double)(a[j] - y[j]) * (a[j] - y[j]);
        for (int q = 0; q < 8; q++) sum += acc[q];
        s->rowsum[r] = sum;
    }
}

/* backward over row blocks [lo, hi) (SUM_ROWS rows each): A <- coef (A - y) in place, and the
 * column sums of block 0's rows into colpart */
static void sq_err_bwd_blocks(void *vc, long lo, long hi) {
    SqErr *s = vc;
    int n = s->n_out;
    long rows = (long)s->n_blocks * s->B;
    for (long blk = lo; blk < hi; blk++) {
        long r0 = blk * SUM_ROWS, r1 = r0 + SUM_ROWS < rows ? r0 + SUM_ROWS : rows;
        float *restrict p = s->colpart && r0 < s->B ? s->colpart + blk * n : NULL;
        if (p) memset(p, 0, (size_t)n * sizeof(float));
        for (long r = r0; r < r1; r++) {
            float *restrict a = s->A + r * n;
            const float *restrict y = sq_err_target(s, r);
            float coef = s->coef[r / s->B];
            for (int j = 0; j < n; j++) a[j] = coef * (a[j] - y[j]);
            if (p && r < s->B)
                for (int j = 0; j < n; j++) p[j] += a[j];
        }
    }
}

Node *nn_dense_sq_err(Tape *t, Node *h, Node *W, Node *b, Node *y, int k, int n_blocks, const int *blocks,
                      const float *w) {
    int rows = h->val.rows, n_in = h->val.cols, n_out = W->val.cols;
    NN_CHECK(k >= 1 && k <= 3 && rows % k == 0, "dense_sq_err: %d rows do not split into k = %d blocks", rows, k);
    NN_CHECK(n_in == W->val.rows, "dense_sq_err: h (%d,%d) x W (%d,%d)", rows, n_in, W->val.rows, n_out);
    NN_CHECK(b->val.rows == 1 && b->val.cols == n_out, "dense_sq_err: bias (%d,%d) for %d outputs", b->val.rows,
             b->val.cols, n_out);
    NN_CHECK(y->val.rows == rows && y->val.cols == n_out && !y->grad,
             "dense_sq_err: targets (%d,%d)%s for an output of (%d,%d)", y->val.rows, y->val.cols,
             y->grad ? " with a gradient" : "", rows, n_out);
    NN_CHECK(n_blocks >= 1 && n_blocks <= k, "dense_sq_err: %d blocks of %d", n_blocks, k);
    for (int i = 0; i < n_blocks; i++)
        NN_CHECK(blocks[i] >= 0 && blocks[i] < k && (i == 0 || blocks[i] > blocks[i - 1]),
                 "dense_sq_err: blocks must increase inside [0, %d)", k);
    Node *in[3] = {h, W, b};
    Node *c = node_new(t, OP_DENSE_SQ_ERR, in, 3, 1, 1, 1);
    c->k = k;
    SqErr *s = arena_alloc(&t->arena, sizeof *s);
    memset(s, 0, sizeof *s);
    c->ctx = s;
    int B = rows / k;
    long nr = (long)n_blocks * B;
    s->n_blocks = n_blocks;
    s->B = B, s->n_in = n_in, s->n_out = n_out;
    s->y = y->val.d;
    s->b = b->val.d;
    s->contiguous = 1;
    for (int i = 0; i < n_blocks; i++) {
        s->blocks[i] = blocks[i];
        s->w[i] = w[i];
        if (blocks[i] != blocks[0] + i) s->contiguous = 0;
    }
    s->h = h->val.d;
    s->A = arena_floats(&t->arena, nr * n_out);
    if (s->contiguous) /* A = h_chosen W, one product */
        mat_gemm(0, 0, 1.0f, mat_view(h->val.d + (long)blocks[0] * B * n_in, (int)nr, n_in), W->val, 0.0f,
                 mat_view(s->A, (int)nr, n_out));
    else /* one product per block (no copy of h's rows) */
        for (int i = 0; i < n_blocks; i++)
            mat_gemm(0, 0, 1.0f, mat_view(h->val.d + (long)blocks[i] * B * n_in, B, n_in), W->val, 0.0f,
                     mat_view(s->A + (long)i * B * n_out, B, n_out));
    s->rowsum = arena_alloc(&t->arena, (size_t)nr * sizeof(double));
    par_for(nr, row_grain(n_out, PAR_LIGHT), sq_err_fwd_rows, s);
    double total = 0;
    for (int i = 0; i < n_blocks; i++) {
        double sum = 0;
        for (long r = (long)i * B; r < (long)(i + 1) * B; r++) sum += s->rowsum[r];
        s->mean[i] = B > 0 && n_out > 0 ? sum / ((double)B * n_out) : 0.0;
        total += (double)s->w[i] * s->mean[i];
    }
    c->val.d[0] = (float)total;
    return c;
}

double nn_dense_sq_err_mean(const Node *c, int i) {
    NN_CHECK(c->op == OP_DENSE_SQ_ERR, "dense_sq_err_mean: node is %s", op_names[c->op]);
    const SqErr *s = c->ctx;
    NN_CHECK(i >= 0 && i < s->n_blocks, "dense_sq_err_mean: block %d of %d", i, s->n_blocks);
    return s->mean[i];
}

/* forward was:  A_i = h_i W (+ b for block 0),  c = sum_i w_i mean((A_i - y_i)^2)
 * so:           dA_i = 2 w_i dc (A_i - y_i) / (B n_out)   (written over A, which is not needed after)
 *               db += column sums of dA_0 (when block 0 is chosen),  dW += sum_i h_i^T dA_i,  dh_i += dA_i W^T */
static void dense_sq_err_backward(Tape *t, Node *c) {
    Node *h = c->in[0], *W = c->in[1], *b = c->in[2];
    SqErr *s = c->ctx;
    int B = s->B, n_in = s->n_in, n_out = s->n_out;
    long nr = (long)s->n_blocks * B;
    for (int i = 0; i < s->n_blocks; i++)
        s->coef[i] = (float)(2.0 * s->w[i] * c->grad[0] / ((double)B * n_out));
    long blocks = (nr + SUM_ROWS - 1) / SUM_ROWS;
    int has_bias = b->grad && s->blocks[0] == 0;
    s->colpart = has_bias ? arena_floats(&t->arena, blocks * n_out) : NULL;
    par_for(blocks, (row_grain(n_out, PAR_LIGHT) + SUM_ROWS - 1) / SUM_ROWS, sq_err_bwd_blocks, s);
    if (has_bias)
        for (long blk = 0; blk * SUM_ROWS < B; blk++)
            for (int j = 0; j < n_out; j++) b->grad[j] += s->colpart[blk * n_out + j];
    Mat dA = mat_view(s->A, (int)nr, n_out);
    if (s->contiguous) {
        float *hc = s->h + (long)s->blocks[0] * B * n_in;
        if (W->grad) mat_gemm(1, 0, 1.0f, mat_view(hc, (int)nr, n_in), dA, 1.0f, grad_mat(W));
        if (h->grad)
            mat_gemm(0, 1, 1.0f, dA, W->val, 1.0f, mat_view(h->grad + (long)s->blocks[0] * B * n_in, (int)nr, n_in));
        return;
    }
    for (int i = 0; i < s->n_blocks; i++) {
        Mat dAi = mat_view(s->A + (long)i * B * n_out, B, n_out);
        if (W->grad)
            mat_gemm(1, 0, 1.0f, mat_view(s->h + (long)s->blocks[i] * B * n_in, B, n_in), dAi, 1.0f, grad_mat(W));
        if (h->grad) mat_gemm(0, 1, 1.0f, dAi, W->val, 1.0f, mat_view(h->grad + (long)s->blocks[i] * B * n_in, B, n_in));
    }
}

/* ---- the backward sweep ------------------------------------------------------------------------ */

void tape_backward(Tape *t, Node *loss) {
    NN_CHECK(loss->val.rows == 1 && loss->val.cols == 1, "backward: loss is (%d,%d), not a scalar",
             loss->val.rows, loss->val.cols);
    NN_CHECK(loss->grad, "backward: the loss depends on nothing that wants a gradient");
    loss->grad[0] += 1.0f;
    for (int i = (int)(loss - t->nodes); i >= 0; i--) {
        Node *n = &t->nodes[i];
        if (!n->grad) continue;
        switch (n->op) {
        case OP_LEAF: case OP_ROWS: break;
        case OP_MATMUL: matmul_backward(n); break;
        case OP_BIAS_ADD: bias_add_backward(n); break;
        case OP_ADD: case OP_SUB: case OP_MUL: binary_backward(n); break;
        case OP_SCALE: scale_backward(n); break;
        case OP_MEAN_SQ: mean_sq_backward(n); break;
        case OP_SUM_ABS: sum_abs_backward(n); break;
        case OP_ACT: act_backward(n); break;
        case OP_DENSE_T: dense_t_backward(t, n); break;
        case OP_DENSE_SQ_ERR: dense_sq_err_backward(t, n); break;
        case OP_VSTACK: vstack_backward(n); break;
        case OP_HSTACK: hstack_backward(n); break;
        case OP_CUSTOM: n->custom->backward(t, n); break;
        case OP_COUNT: NN_CHECK(0, "backward: bad op"); break;
        }
    }
}
