#!/usr/bin/python3
"""The reference side of tests/bench_compare.c (`make bench`): the same model, loss and epoch loop as
framelaw's training, written in PyTorch as fast as it allows on a CPU, timed per epoch.

Run by the benchmark as a child process, once per setting (thread count, OMP_WAIT_POLICY); it can
also be run by hand, e.g. from the repository root on the data that
`build/tests/bench_compare --only V --keep` leaves behind (it prints the folder, DIR):
    /usr/bin/python3 tests/reference/bench_torch.py --data DIR/V.u8 --frames 10260 --n 2304 \
        --recordings 10 --order 2 --latent 1 --widths 64,32 --degree 3 --trig 1 --batch 256 --threads 1
(the video workload V: 48x48 frames, encoder 2304-64-32-1; the benchmark always passes --batch).
`--selftest` checks the hand-written layer against torch.autograd.gradcheck and against the same
formulas through plain autograd, then exits.

What it computes (unchanged from the first version of this reference, and the same as framelaw's
step with `model.derivatives` frames; docs/performance.md):

Data: a raw file of uint8 frames, (frames, n) row-major, in equally long recordings, held as a uint8
tensor. Each batch is gathered from it and converted to float32 with the central-difference stencil,
as framelaw's gather does:  x = q[f] / 255,  x' = (q[f+1] - q[f-1]) / (2 dt 255),
x'' = (q[f+1] - 2 q[f] + q[f-1]) / (dt^2 255), for sample frames f whose neighbours lie in the same
recording; the samples are shuffled every epoch (torch.randperm).

Model (float32): encoder n-w1-...-latent and the mirrored decoder, sigmoid hidden layers, linear last
layers, weights (n_in, n_out) Glorot-uniform, zero biases; library Theta(s) with s = z (first order)
or (z, z') (second order): the constant, every monomial of total degree 1..degree (sorted index
tuples), and with --trig 1 sin of every variable; coefficients Xi (n_terms, latent), zero at the
start, times a mask of ones.

Tangents are propagated forward by hand: with a = h W + b, u = h' W, v = h'' W,
    y = s(a),  y' = s'(a) u,  y'' = s''(a) u^2 + s'(a) v.
Loss, every squared term a mean over batch and components (F.mse_loss):
  first order:   |x - x_hat|^2 + w_dx |x' - x_hat'|^2 + w_dz |z' - Theta(z) Xi|^2 + w_l1 |Xi|_1
  second order:  |x - x_hat|^2 + w_dx |x'' - x_hat''|^2 + w_dz |z'' - Theta(z, z') Xi|^2 + w_l1 |Xi|_1
with the decoder fed (z, Theta(z) Xi) resp. (z, z', Theta(z, z') Xi); the second-order decoder's
last layer computes only x_hat and x_hat'' (the loss does not read x_hat'), as framelaw does.
torch.optim.Adam (lr 1e-3, betas 0.9, 0.999, eps 1e-8), one step per batch.

How it is made fast (each measured on V and S, docs/performance.md; the first version of this script,
which did the same arithmetic, took 3.4 s per V epoch at 1 thread where this one takes about 0.6):
- glibc's allocator is told to keep freed memory (mallopt through ctypes: mmap threshold 32 MB, trim
  threshold 1 GB, top pad 64 MB). By default every tensor of a few MB is a fresh mmap, freed back to
  the kernel at the end of the step, so each step page-faults and zeroes all its big buffers again:
  that alone made the first version 4x slower (and half its time system time). PyTorch's CPU tuning
  advice is a caching allocator (jemalloc or tcmalloc preloaded); this is the same effect without
  one. --malloc 0 leaves glibc as it is.
- The k derivative blocks are stacked, (k B, n_in), and each layer is one product (H W) instead of
  one per block, as framelaw stacks them; the batch is gathered once into a reused buffer.
- The sigmoid layer with its tangents is a torch.autograd.Function (SigTangent) with its backward
  written out: a handful of ops per layer instead of autograd's graph of some twenty nodes, slices
  and all. --layer autograd runs the same formulas through plain autograd instead.
- Squared terms by F.mse_loss (one fused op each way; `(a - b) ** 2` costs a pow and its slow
  backward), the library's monomials by gathering three index columns of (1, s) and multiplying
  (two ops for all of them, the same products in the same order as one column at a time).
- The parameters are views of one flat buffer, and so are their gradients, so that Adam runs as one
  set of elementwise ops over all of them (Adam is elementwise: the same update as per tensor).
  --flat 0: one tensor each (foreach Adam).
- Threads: torch.set_num_threads(--threads); the benchmark sets OPENBLAS_NUM_THREADS and
  OMP_NUM_THREADS alike and tries OMP_WAIT_POLICY passive too (libgomp's threads otherwise spin
  against OpenBLAS's after each parallel region).

Output (stdout, one line each): "torch VERSION", "threads N", "epoch SECONDS" per timed epoch
(after --warmup untimed epochs; with --max-seconds, at least 3 and none more once that much time is
timed), "loss FIRST LAST" (mean loss of the first and last epoch), "peak_rss_kb KB"
(resource.getrusage ru_maxrss).
"""
import argparse
import ctypes
import itertools
import math
import resource
import time

import numpy as np
import torch
import torch.nn.functional as F


def parse():
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("--data")
    p.add_argument("--frames", type=int)
    p.add_argument("--n", type=int)
    p.add_argument("--recordings", type=int)
    p.add_argument("--order", type=int)
    p.add_argument("--latent", type=int)
    p.add_argument("--widths", help="hidden widths of the encoder, comma-separated")
    p.add_argument("--degree", type=int, default=3)
    p.add_argument("--trig", type=int, default=0)
    p.add_argument("--fps", type=float, default=30.0)
    p.add_argument("--batch", type=int, default=256, help="samples per step (bench_compare passes its own)")
    p.add_argument("--epochs", type=int, default=5)
    p.add_argument("--warmup", type=int, default=1)
    p.add_argument("--threads", type=int, default=1)
    p.add_argument("--max-seconds", type=float, default=0,
                   help="stop after this many timed seconds once 3 epochs are timed (0: no limit)")
    p.add_argument("--w", default="1,1e-4,1e-3,1e-5", help="loss weights rec,dx,dz,l1")
    p.add_argument("--lr", type=float, default=1e-3,
                   help="Adam learning rate; with --run R > 1 the steps use lr / sqrt(R), as framelaw's "
                        "train.run_length")
    p.add_argument("--seed", type=int, default=1)
    p.add_argument("--malloc", type=int, default=1, help="1: glibc keeps freed memory (mallopt); 0: as it is")
    p.add_argument("--layer", choices=["function", "autograd"], default="function",
                   help="sigmoid layers with tangents: hand-written backward, or plain autograd")
    p.add_argument("--flat", type=int, default=1, help="1: parameters and gradients in one flat buffer")
    p.add_argument("--window", type=int, default=0,
                   help="0: the frames' derivatives by tangents; W > 0: latent mode, the Savitzky-Golay "
                        "stencil of W frames and degree 3 applied to the codes (see latent_main)")
    p.add_argument("--run", type=int, default=1,
                   help="samples per run of an epoch's order; > 1: each distinct frame of a batch goes "
                        "through the first layer once (torch.unique): latent mode encodes it once, frames "
                        "mode forms the tangent rows as the stencil over the frames' products")
    p.add_argument("--share", type=int, default=1,
                   help="latent mode with --run 1: 1 encodes each distinct frame of a batch once (torch.unique), "
                        "as framelaw does; 0 encodes every window's frames (the reference before 2026-12-05)")
    p.add_argument("--selftest", action="store_true", help="check the layer's backward and exit")
    a = p.parse_args()
    if not a.selftest:
        for k in ("data", "frames", "n", "recordings", "order", "latent", "widths"):
            if getattr(a, k) is None:
                p.error("--%s is required" % k)
    return a


def keep_freed_memory():
    """glibc: serve big tensors from the heap and keep what is freed (mallopt returns 1 on success)."""
    libc = ctypes.CDLL("libc.so.6")
    M_TRIM_THRESHOLD, M_TOP_PAD, M_MMAP_THRESHOLD = -1, -2, -3
    return (libc.mallopt(M_MMAP_THRESHOLD, 32 << 20) and libc.mallopt(M_TRIM_THRESHOLD, 1 << 30)
            and libc.mallopt(M_TOP_PAD, 64 << 20))


def glorot(n_in, n_out, gen):
    r = (6.0 / (n_in + n_out)) ** 0.5
    return ((torch.rand(n_in, n_out, generator=gen) * 2 - 1) * r).requires_grad_()


class SigTangent(torch.autograd.Function):
    """A (k B, w) = the stacked products (h W; h' W[; h'' W]), b (w): returns the next layer's stacked
    input (s; s' u[; s'' u^2 + s' v]) with s = sigmoid(h W + b), u = h' W, v = h'' W.
    Backward, with s1 = s', s2 = s'', s3 = s''' = s1 ((1 - 2 s)^2 - 2 s1) and g0, g1, g2 the blocks of
    the incoming gradient:
      da = g0 s1 + g1 s2 u + g2 (s3 u^2 + s2 v),  du = g1 s1 + 2 g2 s2 u,  dv = g2 s1,  db = sum da."""

    @staticmethod
    def forward(ctx, A, b, B):
        s = torch.sigmoid(A[:B] + b)
        s1 = s * (1 - s)
        s2 = s1 * (1 - 2 * s)
        u = A[B:2 * B]
        ctx.B = B
        if A.shape[0] == 3 * B:
            v = A[2 * B:]
            ctx.save_for_backward(s, s1, s2, u, v)
            return torch.cat([s, s1 * u, s2 * u * u + s1 * v])
        ctx.save_for_backward(s, s1, s2, u)
        return torch.cat([s, s1 * u])

    @staticmethod
    def backward(ctx, g):
        B = ctx.B
        gA = torch.empty_like(g)
        g0, g1 = g[:B], g[B:2 * B]
        if len(ctx.saved_tensors) == 5:
            s, s1, s2, u, v = ctx.saved_tensors
            g2 = g[2 * B:]
            s3 = s1 * ((1 - 2 * s) ** 2 - 2 * s1)
            ga = g0 * s1 + g1 * s2 * u + g2 * (s3 * u * u + s2 * v)
            torch.mul(g1, s1, out=gA[B:2 * B]).add_(2 * g2 * s2 * u)
            torch.mul(g2, s1, out=gA[2 * B:])
        else:
            s, s1, s2, u = ctx.saved_tensors
            ga = g0 * s1 + g1 * s2 * u
            torch.mul(g1, s1, out=gA[B:2 * B])
        gA[:B] = ga
        return gA, ga.sum(0), None


def sig_tangent_autograd(A, b, B):
    """The same as SigTangent through plain autograd."""
    s = torch.sigmoid(A[:B] + b)
    s1 = s * (1 - s)
    u = A[B:2 * B]
    if A.shape[0] == 2 * B:
        return torch.cat([s, s1 * u])
    s2 = s1 * (1 - 2 * s)
    return torch.cat([s, s1 * u, s2 * u * u + s1 * A[2 * B:]])


def selftest():
    torch.manual_seed(0)
    ok = True
    for k in (2, 3):
        B = 5
        A = torch.randn(k * B, 4, dtype=torch.double, requires_grad=True)
        b = torch.randn(4, dtype=torch.double, requires_grad=True)
        ok &= torch.autograd.gradcheck(lambda A, b: SigTangent.apply(A, b, B), (A, b))
        o1, o2 = SigTangent.apply(A, b, B), sig_tangent_autograd(A, b, B)
        G = torch.randn_like(o1)
        g1, g2 = torch.autograd.grad(o1, (A, b), G), torch.autograd.grad(o2, (A, b), G)
        err = max((o1 - o2).abs().max().item(), *((x - y).abs().max().item() for x, y in zip(g1, g2)))
        print("k %d: gradcheck passed, largest difference to plain autograd %.3g" % (k, err))
        ok &= err < 1e-12
    return ok


def library_columns(n_vars, degree):
    """Index columns (3, n_monomials) into (1, s): the constant (0, 0, 0), then every sorted tuple of
    degree 1..degree, padded with the 1 at index 0 (degree <= 3)."""
    assert degree <= 3
    idx = [(0, 0, 0)]
    for d in range(1, degree + 1):
        for t in itertools.combinations_with_replacement(range(n_vars), d):
            idx.append(tuple(i + 1 for i in t) + (0,) * (3 - d))
    return torch.tensor(idx, dtype=torch.long).T.contiguous()


def savgol_weights(window, degree, dt):
    """Weights (window,) of the least-squares polynomial's first and second derivative at the centre
    (A. Savitzky, M. J. E. Golay, Analytical Chemistry 36, 1964): the rows 1 and 2 of the
    pseudo-inverse of the Vandermonde matrix of the offsets, times 1 / dt and 2 / dt^2."""
    m = window // 2
    V = np.vander(np.arange(-m, m + 1, dtype=np.float64), degree + 1, increasing=True)
    P = np.linalg.pinv(V)
    return P[1] / dt, 2 * P[2] / (dt * dt)


def adam_params(params, flat_buffer, lr):
    """Adam over params, as one flat buffer of views (flat_buffer 1) or foreach."""
    adam = dict(lr=lr, betas=(0.9, 0.999), eps=1e-8)
    if not flat_buffer:
        return torch.optim.Adam(params, foreach=True, **adam)
    flat = torch.zeros(sum(p.numel() for p in params), requires_grad=True)
    flat.grad = torch.zeros_like(flat)
    o = 0
    with torch.no_grad():
        for p in params:
            m = p.numel()
            flat[o:o + m] = p.reshape(-1)
            p.data = flat.data[o:o + m].view(p.shape)
            p.grad = flat.grad[o:o + m].view(p.shape)   # backward adds into it in place
            o += m
    return torch.optim.Adam([flat], **adam)


def latent_main(a, q, gen):
    """Latent mode (framelaw's model.derivatives latent with loss.normalize, second order): every
    frame of the W-frame window around a sample is encoded (sigmoid hidden layers, plain autograd),
    z = the centre frame's code, z' and z'' the Savitzky-Golay stencil applied to the codes; library
    Theta(z, z'): every monomial of degree 1..degree (no constant) and sin z, cos z; the decoder
    reconstructs the centre frame only. Loss: w_rec |x - x_hat|^2 / var(x) + w_dz |z'' - Theta Xi|^2 /
    mean(z''^2) + w_l1 |Xi|_1, var(x) the pixels' mean variance over the training frames (as
    framelaw's loss.normalize). With --run R > 1 the epoch deals runs of R consecutive samples and
    each distinct frame of a batch is encoded once (torch.unique, the codes gathered back); so it is
    with shuffled samples (--run 1) unless --share 0, since their windows overlap too."""
    assert a.order == 2 and a.latent >= 1
    W, m = a.window, a.window // 2
    per = a.frames // a.recordings
    valid = torch.tensor([r * per + f for r in range(a.recordings) for f in range(m, per - m)], dtype=torch.long)
    w1, w2 = (torch.tensor(w, dtype=torch.float32) for w in savgol_weights(W, 3, 1.0 / a.fps))
    offs = torch.arange(-m, m + 1, dtype=torch.long)
    xs = q[valid].double() / 255
    rec_norm = 1.0 / xs.var(0, unbiased=False).mean().item()
    del xs
    w_rec, _, w_dz, w_l1 = (float(v) for v in a.w.split(","))
    hidden = [int(v) for v in a.widths.split(",")]
    ew = [a.n] + hidden + [a.latent]
    dw = ew[::-1]
    L = len(ew) - 1
    eW = [glorot(ew[l], ew[l + 1], gen) for l in range(L)]
    eb = [torch.zeros(ew[l + 1], requires_grad=True) for l in range(L)]
    dW = [glorot(dw[l], dw[l + 1], gen) for l in range(L)]
    db = [torch.zeros(dw[l + 1], requires_grad=True) for l in range(L)]
    d = a.latent
    cols = library_columns(2 * d, a.degree)[:, 1:]      # no constant
    n_terms = cols.shape[1] + 2 * d
    xi = torch.zeros(n_terms, d, requires_grad=True)
    mask = torch.ones(n_terms, d)
    opt = adam_params(eW + eb + dW + db + [xi], a.flat, a.lr / math.sqrt(max(a.run, 1)))

    def theta(s):
        one_s = torch.cat([torch.ones(s.shape[0], 1), s], dim=1)
        th = one_s[:, cols[0]] * one_s[:, cols[1]] * one_s[:, cols[2]]
        z = s[:, :d]
        return torch.cat([th, torch.sin(z), torch.cos(z)], dim=1)

    share = a.run > 1 or a.share

    def step(f):
        B = len(f)
        fw = (offs[:, None] + f[None, :]).reshape(-1)   # (W B): offset-major, as framelaw's blocks
        if share:
            uniq, inv = torch.unique(fw, return_inverse=True)
            X = q[uniq].float().mul_(1.0 / 255)
        else:
            X = q[fw].float().mul_(1.0 / 255)
        H = X
        for l in range(L - 1):
            H = torch.sigmoid(torch.addmm(eb[l], H, eW[l]))
        Z = torch.addmm(eb[L - 1], H, eW[L - 1])
        Zw = (Z[inv] if share else Z).view(W, B, d)
        z = Zw[m]
        z1 = torch.tensordot(w1, Zw, dims=1)
        z2 = torch.tensordot(w2, Zw, dims=1)
        xim = xi * mask
        pred = theta(torch.cat([z, z1], dim=1)) @ xim
        H = z
        for l in range(L - 1):
            H = torch.sigmoid(torch.addmm(db[l], H, dW[l]))
        xc = X[inv[m * B:(m + 1) * B]] if share else X[m * B:(m + 1) * B]
        l_rec = F.mse_loss(torch.addmm(db[L - 1], H, dW[L - 1]), xc)
        l_dz = F.mse_loss(pred, z2) / ((z2 * z2).mean() + 1e-12)
        loss = w_rec * rec_norm * l_rec + w_dz * l_dz + w_l1 * xim.abs().sum()
        opt.zero_grad(set_to_none=not a.flat)
        loss.backward()
        opt.step()
        return loss.detach()

    return step, run_order(valid, a.run)


def run_order(valid, run):
    """The epoch's order: the valid samples shuffled, or (run R > 1) runs of R consecutive ones, the
    runs shuffled (framelaw's train.run_length)."""
    R = max(run, 1)
    n_runs = (len(valid) + R - 1) // R

    def epoch_order():
        if R == 1:
            return valid[torch.randperm(len(valid))]
        runs = torch.randperm(n_runs)
        pos = (runs[:, None] * R + torch.arange(R)[None, :]).reshape(-1)
        return valid[pos[pos < len(valid)]]

    return epoch_order


def main():
    a = parse()
    if a.selftest:
        raise SystemExit(0 if selftest() else 1)
    if a.malloc and not keep_freed_memory():
        print("warning: mallopt failed", flush=True)
    torch.set_num_threads(a.threads)
    gen = torch.Generator().manual_seed(a.seed)
    torch.manual_seed(a.seed)
    q = torch.from_numpy(np.fromfile(a.data, dtype=np.uint8).reshape(a.frames, a.n))
    if a.window:
        step, epoch_order = latent_main(a, q, gen)
        run_epochs(a, step, epoch_order)
        return
    per = a.frames // a.recordings
    valid = torch.tensor([r * per + f for r in range(a.recordings) for f in range(1, per - 1)], dtype=torch.long)
    dt = 1.0 / a.fps
    g0, g1, g2 = 1.0 / 255, 0.5 / (dt * 255), 1.0 / (dt * dt * 255)
    w_rec, w_dx, w_dz, w_l1 = (float(v) for v in a.w.split(","))

    hidden = [int(v) for v in a.widths.split(",")]
    ew = [a.n] + hidden + [a.latent]
    dw = ew[::-1]
    L = len(ew) - 1
    eW = [glorot(ew[l], ew[l + 1], gen) for l in range(L)]
    eb = [torch.zeros(ew[l + 1], requires_grad=True) for l in range(L)]
    dW = [glorot(dw[l], dw[l + 1], gen) for l in range(L)]
    db = [torch.zeros(dw[l + 1], requires_grad=True) for l in range(L)]
    n_vars = a.order * a.latent
    cols = library_columns(n_vars, a.degree)
    n_terms = cols.shape[1] + (n_vars if a.trig else 0)
    xi = torch.zeros(n_terms, a.latent, requires_grad=True)
    mask = torch.ones(n_terms, a.latent)
    opt = adam_params(eW + eb + dW + db + [xi], a.flat, a.lr / math.sqrt(max(a.run, 1)))
    layer = SigTangent.apply if a.layer == "function" else sig_tangent_autograd
    k = a.order + 1
    xbuf = torch.empty(k * a.batch, a.n)    # (k B, n): x; x'; x''

    def theta(s):
        one_s = torch.cat([torch.ones(s.shape[0], 1), s], dim=1)
        th = one_s[:, cols[0]] * one_s[:, cols[1]] * one_s[:, cols[2]]
        return torch.cat([th, torch.sin(s)], dim=1) if a.trig else th

    def step(f):
        B = len(f)
        fr = q[torch.cat([f - 1, f, f + 1])].float()    # (3B, n): q[f-1]; q[f]; q[f+1]
        q0, q1, q2 = fr[:B], fr[B:2 * B], fr[2 * B:]
        X = xbuf[:k * B]
        x, xd = X[:B], X[B:2 * B]
        torch.mul(q1, g0, out=x)
        torch.sub(q2, q0, out=xd).mul_(g1)
        if a.order == 2:
            torch.add(q2, q1, alpha=-2, out=X[2 * B:]).add_(q0).mul_(g2)
        if a.run > 1:
            # runs: the first layer's products of each distinct frame once, P = x W; the tangent
            # rows are the central stencil over them, x' W = (P[f+1] - P[f-1]) / (2 dt), x'' W =
            # (P[f+1] - 2 P[f] + P[f-1]) / dt^2 (the layer is linear before its activation)
            uniq, inv = torch.unique(torch.cat([f - 1, f, f + 1]), return_inverse=True)
            P = q[uniq].float().mul_(g0) @ eW[0]
            p0, p1, p2 = P[inv[:B]], P[inv[B:2 * B]], P[inv[2 * B:]]
            blocks = [p1, (p2 - p0).mul_(0.5 / dt)]
            if a.order == 2:
                blocks.append((p2 - 2 * p1 + p0).mul_(1.0 / (dt * dt)))
            A = torch.cat(blocks)
        else:
            A = X @ eW[0]
        if L == 1:
            Z = A
        else:
            H = layer(A, eb[0], B)
            for l in range(1, L - 1):
                H = layer(H @ eW[l], eb[l], B)
            Z = H @ eW[L - 1]                            # (k B, latent)
        z, zd = Z[:B] + eb[L - 1], Z[B:2 * B]
        xim = xi * mask
        if a.order == 1:
            pred = theta(z) @ xim                        # z' predicted
            H = torch.cat([z, pred])
        else:
            pred = theta(torch.cat([z, zd], dim=1)) @ xim  # z'' predicted
            H = torch.cat([z, zd, pred])
        for l in range(L - 1):
            H = layer(H @ dW[l], db[l], B)
        l_rec = F.mse_loss(torch.addmm(db[L - 1], H[:B], dW[L - 1]), x)
        if a.order == 1:
            l_dx = F.mse_loss(H[B:] @ dW[L - 1], xd)
            l_dz = F.mse_loss(pred, zd)
        else:
            l_dx = F.mse_loss(H[2 * B:] @ dW[L - 1], X[2 * B:])
            l_dz = F.mse_loss(pred, Z[2 * B:])
        loss = w_rec * l_rec + w_dx * l_dx + w_dz * l_dz + w_l1 * xim.abs().sum()
        opt.zero_grad(set_to_none=not a.flat)
        loss.backward()
        opt.step()
        return loss.detach()

    run_epochs(a, step, run_order(valid, a.run))


def run_epochs(a, step, epoch_order):
    print("torch", torch.__version__, flush=True)
    print("threads", torch.get_num_threads(), flush=True)
    losses = []
    timed = 0.0
    for e in range(a.warmup + a.epochs):
        if a.max_seconds > 0 and e >= a.warmup + 3 and timed > a.max_seconds:
            break  # a setting this slow is not the reference's best; 3 epochs give its median
        t0 = time.perf_counter()
        order = epoch_order()
        total = torch.zeros((), dtype=torch.float64)
        for b0 in range(0, len(order), a.batch):
            f = order[b0:b0 + a.batch]
            total += step(f) * len(f)
        dt_epoch = time.perf_counter() - t0
        losses.append(total.item() / len(order))
        if e >= a.warmup:
            timed += dt_epoch
            print("epoch %.6f" % dt_epoch, flush=True)
    print("loss %.6g %.6g" % (losses[0], losses[-1]))
    print("peak_rss_kb", resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)


if __name__ == "__main__":
    main()
