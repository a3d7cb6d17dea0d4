/* nn/tape.h: reverse-mode automatic differentiation on a tape.
 *
 * Define by run: each op computes its value when it is recorded and appends one node; the nodes are
 * therefore already in topological order. tape_backward seeds d(loss) = 1 and walks the array down,
 * each op accumulating (+=) into the gradients of its inputs. Values and gradients live in the step
 * arena; a parameter's leaf node points straight into the ParamSet's value and gradient buffers,
 * so backward accumulates into them. tape_reset forgets the nodes and resets the arena.
 *
 * Shapes in comments are (rows, cols). k is the number of stacked blocks (1 primal, 2 with the
 * first tangent, 3 with the second) and B the batch size: a stacked matrix is (k*B, n), rows
 * [0, B) the primal values, [B, 2B) the first and [2B, 3B) the second time derivative. */
#ifndef NN_TAPE_H
#define NN_TAPE_H

#include <stdio.h>

#include "nn/act.h"
#include "nn/arena.h"
#include "nn/mat.h"
#include "nn/params.h"

typedef enum {
    OP_LEAF,        /* input or parameter                                  */
    OP_MATMUL,      /* c = op(a) op(b)                                     */
    OP_BIAS_ADD,    /* c = a + 1 b,  b (1, n) added to every row           */
    OP_ADD,         /* c = a + b                                           */
    OP_SUB,         /* c = a - b                                           */
    OP_MUL,         /* c = a * b elementwise                               */
    OP_SCALE,       /* c = alpha a                                         */
    OP_MEAN_SQ,     /* c (1,1) = mean(a^2)                                 */
    OP_SUM_ABS,     /* c (1,1) = sum |a|   (subgradient 0 at 0)            */
    OP_ACT,         /* c = s(a) elementwise                                */
    OP_DENSE_T,     /* fused dense layer with tangents, see nn_dense_t      */
    OP_ROWS,        /* c = a[r0 : r0 + n, :] (a view, gradient flows back) */
    OP_VSTACK,      /* c = [a; b]                                          */
    OP_HSTACK,      /* c = [a, b]                                          */
    OP_CUSTOM,      /* an op defined outside nn/ (sparse/ library)          */
    OP_DENSE_SQ_ERR,/* c (1,1) = sum_i w_i mean((h_i W (+b) - y_i)^2), see nn_dense_sq_err */
    OP_COUNT
} OpId;

extern const char *const op_names[]; /* OP_COUNT names */

typedef struct Node Node;
typedef struct Tape Tape;

/* A custom op's backward: accumulate into the inputs' gradients (those that are non-NULL). */
typedef void (*CustomBackward)(Tape *t, Node *n);

typedef struct {
    const char *name;
    CustomBackward backward;
} CustomOp;

struct Node {
    OpId op;
    Mat val;                    /* value */
    float *grad;                /* same shape as val; NULL when no gradient is needed */
    Node *in[3];
    int n_in;
    /* op arguments */
    int ta, tb;                 /* matmul transposes */
    int k;                      /* dense_t: stacked blocks */
    int r0;                     /* rows: first row */
    ActId act;
    float alpha;                /* scale */
    float *saved;               /* op-specific saved forward data (arena) */
    const CustomOp *custom;
    void *ctx;                  /* custom op's context (arena or caller-owned) */
};

struct Tape {
    Node *nodes;
    int n, cap;
    Arena arena;
};

void tape_init(Tape *t, int max_nodes, size_t arena_bytes);
void tape_free(Tape *t);
void tape_reset(Tape *t);               /* drop every node, reset the arena */
void tape_backward(Tape *t, Node *loss); /* loss must be (1,1) */
void tape_print(const Tape *t, FILE *f);   /* one line per node: index, op, shape, inputs */

/* Leaves. A leaf copies nothing: it refers to caller memory that must outlive the step. grad may be
 * NULL (no gradient wanted); otherwise backward accumulates into it. */
Node *nn_leaf(Tape *t, float *data, float *grad, int rows, int cols);
static inline Node *nn_input(Tape *t, float *data, int rows, int cols) {
    return nn_leaf(t, data, NULL, rows, cols);
}
Node *nn_param(Tape *t, ParamSet *ps, int idx);
/* Allocate a node for a custom op: value (rows, cols) in the arena; grad allocated when any input
 * needs one. The caller fills val.d. */
Node *nn_custom(Tape *t, const CustomOp *op, void *ctx, Node **in, int n_in, int rows, int cols);

Node *nn_matmul(Tape *t, Node *a, Node *b, int trans_a, int trans_b);
Node *nn_bias_add(Tape *t, Node *a, Node *b);
Node *nn_add(Tape *t, Node *a, Node *b);
Node *nn_sub(Tape *t, Node *a, Node *b);
Node *nn_mul(Tape *t, Node *a, Node *b);
Node *nn_scale(Tape *t, Node *a, float alpha);
Node *nn_mean_sq(Tape *t, Node *a);
Node *nn_sum_abs(Tape *t, Node *a);
Node *nn_act(Tape *t, Node *a, ActId act);
Node *nn_rows(Tape *t, Node *a, int r0, int n);
Node *nn_vstack(Tape *t, Node *a, Node *b);
Node *nn_hstack(Tape *t, Node *a, Node *b);

/* The fused dense layer with tangents (one sgemm over the stacked rows, docs/nn.md):
 *   h (k*B, n_in), W (n_in, n_out), b (1, n_out)  ->  out (k*B, n_out)
 *   A = h W (one product);  a = A[0:B] + b,  u = A[B:2B],  v = A[2B:3B]
 *   out[0:B]   = s(a)
 *   out[B:2B]  = s'(a) * u
 *   out[2B:3B] = s''(a) * u * u + s'(a) * v
 * act = ACT_NONE gives the linear layer (out = A, bias on the primal rows only). */
Node *nn_dense_t(Tape *t, Node *h, Node *W, Node *b, int k, ActId act);

/* nn_dense_t over frames shared by the batch's samples (frame sharing in frames mode): F (U, n_in)
 * holds each distinct frame once, map (win B) places them (map[j B + b] the row of the frame at
 * offset j - win/2 of sample b) and w1, w2 (win) are the stencil's weights of x' and x''. The layer
 * is linear before its activation, so the tangents' products are the stencil over the frames'
 * products: with P = F W (one product over the U distinct frames),
 *   A[0:B] = P[map[c B + b]],  A[B:2B] = sum_j w1[j] P[map[j B + b]],  A[2B:3B] = the same with w2
 * and then exactly nn_dense_t's bias, activation and tangents; the output is nn_dense_t's on the
 * expanded h = (x, x', x'') to float rounding. Backward: dW = F^T dP with dP the map's transpose
 * applied to dA (one product back). map, w1 and w2 must outlive the backward pass. */
Node *nn_dense_t_map(Tape *t, Node *F, Node *W, Node *b, int k, ActId act, const int *map, int win, const float *w1,
                     const float *w2, int B);

/* A linear output layer fused with weighted squared errors against targets, over chosen blocks of
 * the k stacked ones (the decoder's last layer and the reconstruction loss in one op; its output
 * is never a node, and blocks that are not chosen are not computed):
 *   h (k*B, n_in), W (n_in, n_out), b (1, n_out), y (k*B, n_out) targets (no gradient)
 *   for the chosen blocks j = blocks[0 .. n_blocks) (increasing): A_j = h_j W, plus b for block 0
 *   c (1,1) = sum_i w[i] mean((A_{blocks[i]} - y_{blocks[i]})^2)   (mean over the B n_out elements)
 * Reductions are taken over fixed row blocks, so c does not depend on the thread count. The
 * backward turns the saved product into its gradient in place: run it once per recording. */
Node *nn_dense_sq_err(Tape *t, Node *h, Node *W, Node *b, Node *y, int k, int n_blocks, const int *blocks,
                      const float *w);
/* The unweighted mean of the i-th chosen block (i < n_blocks) of a dense_sq_err node. */
double nn_dense_sq_err_mean(const Node *c, int i);

#endif
