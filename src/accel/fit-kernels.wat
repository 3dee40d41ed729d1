;; The ellipse fit's per-sample sums in WebAssembly SIMD: the moment sums Σ u^i v^j (i + j <= 4) and the coverage
;; grid of src/core/fit/accumulator.ts, to the bit. Each sum stays a sequential sum over the samples in their order;
;; the SIMD lanes hold different sums (two per vector), so nothing is regrouped.
;; Build: node scripts/build-accel.mjs (writes fit-kernels-wasm.ts).
;;
;; Memory: the grid's 128×128 bits at 0 (as the core's Uint32Array), the running sums at 2048 (16 f64, lane
;; pairs [s00 s10] [s01 s20] [s11 s02] [s30 s21] [s12 s03] [s40 s31] [s22 s13] [s04 -], the moments' order),
;; the count of skipped non-finite pairs at 2176 (i32), x at 4096 and y at 36864 (4096 f64 each).
(module
  (memory (export "memory") 2)

  ;; sums(i, n, shiftX, shiftY, half, cellsPerUnit): adds pairs i.. of the loaded n to the running sums and marks
  ;; their grid cells, skipping (and counting) non-finite pairs. Returns n at the end, or −(k + 1) after summing a
  ;; pair k that falls outside the grid (|u| or |v| >= half): the caller marks it (zooming the grid out) and
  ;; continues at k + 1.
  (func (export "sums") (param $i i32) (param $n i32) (param $sx f64) (param $sy f64) (param $half f64) (param $cpu f64) (result i32)
    (local $x f64) (local $y f64) (local $u f64) (local $v f64) (local $uu f64) (local $vv f64)
    (local $uvv v128) (local $sq v128) (local $uuuv v128)
    (local $a0 v128) (local $a1 v128) (local $a2 v128) (local $a3 v128)
    (local $a4 v128) (local $a5 v128) (local $a6 v128) (local $a7 v128)
    (local $skipped i32) (local $p i32) (local $col i32) (local $row i32) (local $cell i32) (local $result i32)
    (local.set $a0 (v128.load offset=2048 (i32.const 0)))
    (local.set $a1 (v128.load offset=2064 (i32.const 0)))
    (local.set $a2 (v128.load offset=2080 (i32.const 0)))
    (local.set $a3 (v128.load offset=2096 (i32.const 0)))
    (local.set $a4 (v128.load offset=2112 (i32.const 0)))
    (local.set $a5 (v128.load offset=2128 (i32.const 0)))
    (local.set $a6 (v128.load offset=2144 (i32.const 0)))
    (local.set $a7 (v128.load offset=2160 (i32.const 0)))
    (local.set $skipped (i32.load offset=2176 (i32.const 0)))
    (local.set $result (local.get $n))
    (block $out
      (loop $next
        (br_if $out (i32.ge_s (local.get $i) (local.get $n)))
        (local.set $p (i32.shl (local.get $i) (i32.const 3)))
        (local.set $x (f64.load offset=4096 (local.get $p)))
        (local.set $y (f64.load offset=36864 (local.get $p)))
        (local.set $i (i32.add (local.get $i) (i32.const 1)))
        ;; x − x is 0 for a finite x, NaN for ±Infinity and NaN.
        (if (i32.eqz (i32.and (f64.eq (f64.sub (local.get $x) (local.get $x)) (f64.const 0))
                              (f64.eq (f64.sub (local.get $y) (local.get $y)) (f64.const 0))))
          (then
            (local.set $skipped (i32.add (local.get $skipped) (i32.const 1)))
            (br $next)))
        (local.set $u (f64.sub (local.get $x) (local.get $sx)))
        (local.set $v (f64.sub (local.get $y) (local.get $sy)))
        (local.set $uvv (f64x2.replace_lane 1 (f64x2.splat (local.get $u)) (local.get $v)))
        (local.set $sq (f64x2.mul (local.get $uvv) (local.get $uvv)))
        (local.set $uuuv (f64x2.mul (f64x2.splat (local.get $u)) (local.get $uvv)))
        (local.set $uu (f64x2.extract_lane 0 (local.get $sq)))
        (local.set $vv (f64x2.extract_lane 1 (local.get $sq)))
        ;; [1 u] [v uu] [uv vv] [uu·u uu·v] [u·vv vv·v] [uu·uu uu·uv] [uu·vv uv·vv] [vv·vv 0]
        (local.set $a0 (f64x2.add (local.get $a0) (f64x2.replace_lane 1 (v128.const f64x2 1 0) (local.get $u))))
        (local.set $a1 (f64x2.add (local.get $a1) (f64x2.replace_lane 1 (f64x2.splat (local.get $v)) (local.get $uu))))
        (local.set $a2 (f64x2.add (local.get $a2) (f64x2.replace_lane 0 (local.get $sq) (f64x2.extract_lane 1 (local.get $uuuv)))))
        (local.set $a3 (f64x2.add (local.get $a3) (f64x2.mul (f64x2.splat (local.get $uu)) (local.get $uvv))))
        (local.set $a4 (f64x2.add (local.get $a4) (f64x2.mul
          (f64x2.replace_lane 1 (local.get $uvv) (local.get $vv))
          (f64x2.replace_lane 1 (f64x2.splat (local.get $vv)) (local.get $v)))))
        (local.set $a5 (f64x2.add (local.get $a5) (f64x2.mul (f64x2.splat (local.get $uu)) (local.get $uuuv))))
        (local.set $a6 (f64x2.add (local.get $a6) (f64x2.mul (local.get $uuuv) (f64x2.splat (local.get $vv)))))
        (local.set $a7 (f64x2.add (local.get $a7)
          (f64x2.replace_lane 0 (v128.const f64x2 0 0) (f64.mul (local.get $vv) (local.get $vv)))))
        ;; The grid cell, as the core's mark: min(127, floor((u + half)·cellsPerUnit)) (non-negative, so trunc).
        (if (i32.and (f64.lt (f64.abs (local.get $u)) (local.get $half)) (f64.lt (f64.abs (local.get $v)) (local.get $half)))
          (then
            (local.set $col (i32.trunc_f64_s (f64.mul (f64.add (local.get $u) (local.get $half)) (local.get $cpu))))
            (local.set $row (i32.trunc_f64_s (f64.mul (f64.add (local.get $v) (local.get $half)) (local.get $cpu))))
            (local.set $col (select (i32.const 127) (local.get $col) (i32.gt_s (local.get $col) (i32.const 127))))
            (local.set $row (select (i32.const 127) (local.get $row) (i32.gt_s (local.get $row) (i32.const 127))))
            (local.set $cell (i32.add (i32.shl (local.get $row) (i32.const 7)) (local.get $col)))
            (local.set $p (i32.shl (i32.shr_u (local.get $cell) (i32.const 5)) (i32.const 2)))
            (i32.store (local.get $p) (i32.or (i32.load (local.get $p)) (i32.shl (i32.const 1) (local.get $cell))))
            (br $next)))
        (local.set $result (i32.sub (i32.const 0) (local.get $i)))))
    (v128.store offset=2048 (i32.const 0) (local.get $a0))
    (v128.store offset=2064 (i32.const 0) (local.get $a1))
    (v128.store offset=2080 (i32.const 0) (local.get $a2))
    (v128.store offset=2096 (i32.const 0) (local.get $a3))
    (v128.store offset=2112 (i32.const 0) (local.get $a4))
    (v128.store offset=2128 (i32.const 0) (local.get $a5))
    (v128.store offset=2144 (i32.const 0) (local.get $a6))
    (v128.store offset=2160 (i32.const 0) (local.get $a7))
    (i32.store offset=2176 (i32.const 0) (local.get $skipped))
    (local.get $result))
)
