/* nn/tape.c: the tape, its ops (forward and backward side by side) and the backward sweep.
 *
 * Every backward accumulates (+=) into the gradients of its inputs, and skips an input whose grad is
 * NULL (a leaf that wants no gradient, or a subgraph that depends on none). */
#include "nn/tape.h"

#include <math.h>
#include <string.h>

#include "nn/core.h"

const char *const op_names[OP_COUNT] = {
    [OP_LEAF] = "leaf",       [OP_MATMUL] = "matmul", [OP_BIAS_ADD] = "bias_add", [OP_ADD] = "add",
    [OP_SUB] = "sub",         [OP_MUL] = "mul",       [OP_SCALE] = "scale",       [OP_MEAN_SQ] = "mean_sq",
    [OP_SUM_ABS] = "sum_abs", [OP_ACT] = "act",       [OP_DENSE_T] = "dense_t",   [OP_ROWS] = "rows",
    [OP_VSTACK] = "vstack",   [OP_HSTACK] = "hstack", [OP_CUSTOM] = "custom",
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
    long nb = (long)B * n_out;
    /* A = h W, one product over all k*B stacked rows; the linear layer writes straight to out */
    float *A = act == ACT_NONE ? c->val.d : arena_floats(&t->arena, (long)rows * n_out); /* (k*B, n_out) */
    c->saved = A;
    mat_gemm(0, 0, 1.0f, h->val, W->val, 0.0f, mat_view(A, rows, n_out));
    for (int i = 0; i < B; i++) /* bias on the primal rows only */
        for (int j = 0; j < n_out; j++) A[(long)i * n_out + j] += b->val.d[j];
    if (act == ACT_NONE) return c;
    ActFn fn = act_table[act].fn;
    float *o = c->val.d, d[4];
    for (long i = 0; i < nb; i++) {
        fn(A[i], d);
        o[i] = d[0];
        if (k >= 2) o[nb + i] = d[1] * A[nb + i];
        if (k >= 3) o[2 * nb + i] = d[2] * A[nb + i] * A[nb + i] + d[1] * A[2 * nb + i];
    }
    return c;
}

/* forward was:  a = (hW)[0:B] + b,  u = (hW)[B:2B],  v = (hW)[2B:3B]
 *               o0 = s(a),  o1 = s'(a) u,  o2 = s''(a) u^2 + s'(a) v
 * so, with g0, g1, g2 the gradients of o0, o1, o2:
 *   dA[0:B]   = da = g0 s'(a) + g1 s''(a) u + g2 (s'''(a) u^2 + s''(a) v)
 *   dA[B:2B]  = du = g1 s'(a) + 2 g2 s''(a) u
 *   dA[2B:3B] = dv = g2 s'(a)
 *   dW += h^T dA,  db += column sums of da,  dh += dA W^T. */
static void dense_t_backward(Tape *t, Node *c) {
    Node *h = c->in[0], *W = c->in[1], *b = c->in[2];
    int rows = c->val.rows, n_out = c->val.cols, k = c->k, B = rows / k;
    long nb = (long)B * n_out;
    float *dA; /* (k*B, n_out) */
    if (c->act == ACT_NONE) {
        dA = c->grad;
    } else {
        dA = arena_floats(&t->arena, (long)rows * n_out);
        const float *A = c->saved, *g = c->grad;
        ActFn fn = act_table[c->act].fn;
        float d[4];
        for (long i = 0; i < nb; i++) {
            fn(A[i], d);
            float da = g[i] * d[1];
            if (k >= 2) {
                float u = A[nb + i], g1 = g[nb + i];
                da += g1 * d[2] * u;
                float du = g1 * d[1];
                if (k >= 3) {
                    float v = A[2 * nb + i], g2 = g[2 * nb + i];
                    da += g2 * (d[3] * u * u + d[2] * v);
                    du += 2 * g2 * d[2] * u;
                    dA[2 * nb + i] = g2 * d[1];
                }
                dA[nb + i] = du;
            }
            dA[i] = da;
        }
    }
    Mat dAm = mat_view(dA, rows, n_out);
    if (b->grad)
        for (int i = 0; i < B; i++)
            for (int j = 0; j < n_out; j++) b->grad[j] += dA[(long)i * n_out + j];
    if (W->grad) mat_gemm(1, 0, 1.0f, h->val, dAm, 1.0f, grad_mat(W));
    if (h->grad) mat_gemm(0, 1, 1.0f, dAm, W->val, 1.0f, grad_mat(h));
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
        case OP_VSTACK: vstack_backward(n); break;
        case OP_HSTACK: hstack_backward(n); break;
        case OP_CUSTOM: n->custom->backward(t, n); break;
        case OP_COUNT: NN_CHECK(0, "backward: bad op"); break;
        }
    }
}
