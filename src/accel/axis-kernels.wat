;; The axis builder's per-block work besides the pipeline, in WebAssembly SIMD: splitting interleaved frames into
;; one axis' detector outputs, and the block summary (min and max of positions and velocities, least level, flags
;; seen). In JavaScript these two loops cost about half of the pipeline itself; here a tenth.
;; Build: node scripts/build-accel.mjs (writes axis-kernels-wasm.ts).
(module
  (memory (export "memory") 1)

  ;; split_pair(src, n, xp, yp): frames of exactly two int16 channels (x, y) into x and y, eight frames per step.
  ;; Reads and writes up to n rounded up to 8 frames: the caller's regions are padded for it.
  (func (export "split_pair") (param $src i32) (param $n i32) (param $xp i32) (param $yp i32)
    (local $a v128) (local $b v128) (local $end i32)
    (local.set $end (i32.add (local.get $xp) (i32.shl (local.get $n) (i32.const 1))))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $xp) (local.get $end)))
        (local.set $a (v128.load (local.get $src)))
        (local.set $b (v128.load offset=16 (local.get $src)))
        (v128.store (local.get $xp) (i8x16.shuffle 0 1 4 5 8 9 12 13 16 17 20 21 24 25 28 29 (local.get $a) (local.get $b)))
        (v128.store (local.get $yp) (i8x16.shuffle 2 3 6 7 10 11 14 15 18 19 22 23 26 27 30 31 (local.get $a) (local.get $b)))
        (local.set $src (i32.add (local.get $src) (i32.const 32)))
        (local.set $xp (i32.add (local.get $xp) (i32.const 16)))
        (local.set $yp (i32.add (local.get $yp) (i32.const 16)))
        (br $next))))

  ;; split(src, strideBytes, n, dst): one int16 channel of n frames (src points at its first sample) into dst.
  (func (export "split") (param $src i32) (param $stride i32) (param $n i32) (param $dst i32)
    (local $end i32)
    (local.set $end (i32.add (local.get $dst) (i32.shl (local.get $n) (i32.const 1))))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $dst) (local.get $end)))
        (i32.store16 (local.get $dst) (i32.load16_u (local.get $src)))
        (local.set $src (i32.add (local.get $src) (local.get $stride)))
        (local.set $dst (i32.add (local.get $dst) (i32.const 2)))
        (br $next))))

  ;; summary(pp, vp, lp, fp, n, out): over n samples of positions (f64), velocities (f64), levels (f32) and flags
  ;; (u8), writes at out: the lanes of the position minimum (4 f64), position maximum (4), velocity minimum (4),
  ;; velocity maximum (4), level minimum (8 f32) and the flags OR-ed in 16 bytes. The regions are first padded up
  ;; to a multiple of 16 samples with NaN and 0, which change nothing: pmin(m, x) is `x < m ? x : m` and pmax(m, x)
  ;; `m < x ? x : m`, the JavaScript loop's `if (x < m) m = x` lane by lane, skipping NaN as it does. Two
  ;; accumulators per quantity keep the dependency chains short.
  (func (export "summary") (param $pp i32) (param $vp i32) (param $lp i32) (param $fp i32) (param $n i32) (param $out i32)
    (local $i i32) (local $q i32) (local $padded i32)
    (local $pmin v128) (local $pmax v128) (local $vmin v128) (local $vmax v128) (local $lmin v128) (local $seen v128)
    (local $pmin1 v128) (local $pmax1 v128) (local $vmin1 v128) (local $vmax1 v128) (local $lmin1 v128)
    (local.set $padded (i32.and (i32.add (local.get $n) (i32.const 15)) (i32.const -16)))
    (local.set $i (local.get $n))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $i) (local.get $padded)))
        (f64.store (i32.add (local.get $pp) (i32.shl (local.get $i) (i32.const 3))) (f64.const nan))
        (f64.store (i32.add (local.get $vp) (i32.shl (local.get $i) (i32.const 3))) (f64.const nan))
        (f32.store (i32.add (local.get $lp) (i32.shl (local.get $i) (i32.const 2))) (f32.const nan))
        (i32.store8 (i32.add (local.get $fp) (local.get $i)) (i32.const 0))
        (local.set $i (i32.add (local.get $i) (i32.const 1)))
        (br $next)))
    (local.set $pmin (f64x2.splat (f64.const inf)))
    (local.set $pmin1 (local.get $pmin))
    (local.set $vmin (local.get $pmin))
    (local.set $vmin1 (local.get $pmin))
    (local.set $pmax (f64x2.splat (f64.const -inf)))
    (local.set $pmax1 (local.get $pmax))
    (local.set $vmax (local.get $pmax))
    (local.set $vmax1 (local.get $pmax))
    (local.set $lmin (f32x4.splat (f32.const inf)))
    (local.set $lmin1 (local.get $lmin))
    (local.set $i (i32.const 0))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $i) (local.get $padded)))
        (local.set $q (i32.add (local.get $pp) (i32.shl (local.get $i) (i32.const 3))))
        (local.set $pmin (f64x2.pmin (local.get $pmin) (v128.load (local.get $q))))
        (local.set $pmax (f64x2.pmax (local.get $pmax) (v128.load (local.get $q))))
        (local.set $pmin1 (f64x2.pmin (local.get $pmin1) (v128.load offset=16 (local.get $q))))
        (local.set $pmax1 (f64x2.pmax (local.get $pmax1) (v128.load offset=16 (local.get $q))))
        (local.set $pmin (f64x2.pmin (local.get $pmin) (v128.load offset=32 (local.get $q))))
        (local.set $pmax (f64x2.pmax (local.get $pmax) (v128.load offset=32 (local.get $q))))
        (local.set $pmin1 (f64x2.pmin (local.get $pmin1) (v128.load offset=48 (local.get $q))))
        (local.set $pmax1 (f64x2.pmax (local.get $pmax1) (v128.load offset=48 (local.get $q))))
        (local.set $q (i32.add (local.get $vp) (i32.shl (local.get $i) (i32.const 3))))
        (local.set $vmin (f64x2.pmin (local.get $vmin) (v128.load (local.get $q))))
        (local.set $vmax (f64x2.pmax (local.get $vmax) (v128.load (local.get $q))))
        (local.set $vmin1 (f64x2.pmin (local.get $vmin1) (v128.load offset=16 (local.get $q))))
        (local.set $vmax1 (f64x2.pmax (local.get $vmax1) (v128.load offset=16 (local.get $q))))
        (local.set $vmin (f64x2.pmin (local.get $vmin) (v128.load offset=32 (local.get $q))))
        (local.set $vmax (f64x2.pmax (local.get $vmax) (v128.load offset=32 (local.get $q))))
        (local.set $vmin1 (f64x2.pmin (local.get $vmin1) (v128.load offset=48 (local.get $q))))
        (local.set $vmax1 (f64x2.pmax (local.get $vmax1) (v128.load offset=48 (local.get $q))))
        (local.set $q (i32.add (local.get $lp) (i32.shl (local.get $i) (i32.const 2))))
        (local.set $lmin (f32x4.pmin (local.get $lmin) (v128.load (local.get $q))))
        (local.set $lmin1 (f32x4.pmin (local.get $lmin1) (v128.load offset=16 (local.get $q))))
        (local.set $i (i32.add (local.get $i) (i32.const 8)))
        (br $next)))
    (local.set $i (i32.const 0))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $i) (local.get $padded)))
        (local.set $seen (v128.or (local.get $seen) (v128.load (i32.add (local.get $fp) (local.get $i)))))
        (local.set $i (i32.add (local.get $i) (i32.const 16)))
        (br $next)))
    (v128.store (local.get $out) (local.get $pmin))
    (v128.store offset=16 (local.get $out) (local.get $pmin1))
    (v128.store offset=32 (local.get $out) (local.get $pmax))
    (v128.store offset=48 (local.get $out) (local.get $pmax1))
    (v128.store offset=64 (local.get $out) (local.get $vmin))
    (v128.store offset=80 (local.get $out) (local.get $vmin1))
    (v128.store offset=96 (local.get $out) (local.get $vmax))
    (v128.store offset=112 (local.get $out) (local.get $vmax1))
    (v128.store offset=128 (local.get $out) (local.get $lmin))
    (v128.store offset=144 (local.get $out) (local.get $lmin1))
    (v128.store offset=160 (local.get $out) (local.get $seen)))
)
