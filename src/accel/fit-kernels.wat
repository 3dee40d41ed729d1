;; The ellipse fit's per-sample sums in WebAssembly SIMD: the moment sums Σ u^i v^j (1 <= i + j <= 4) and the
;; coverage grid of src/core/fit/accumulator.ts, to the bit. Each sum stays a sequential sum over the samples in
;; their order; the SIMD lanes hold different sums (two per vector), so nothing is regrouped. Σ 1 is the count of
;; pairs summed, which the caller knows.
;; Build: node scripts/build-accel.mjs (writes fit-kernels-wasm.ts).
;;
;; Memory: the grid's 128×128 bits at 0 (as the core's Uint32Array), the running sums at 2048 (16 f64, lane pairs
;; [s10 s01] [s20 s11] [- s02] [s30 s21] [s12 s03] [s40 s31] [s22 s13] [s04 -]), the count of skipped non-finite
;; pairs at 2176 (i32), x at 4096 and y at 36864 (4096 f64 each), and a byte per grid cell at 69632 (128×128):
;; the loop marks a cell with a store (128), and `flush` ORs the bytes into the bits, so that no marking waits on
;; the previous one's read of the same word; `flush` also writes the bits it took from the bytes at 86016 (128×128
;; bits), which the caller ORs into a second grid that the same pairs mark (the two-pass fit's fused second pass).
;; The gate (`gate`): the count of pairs kept at 2180 and of those near the bounds at 2184 (i32), its constants at
;; 2304, each in both lanes (15 f64x2: the correction's kux ku0 kvx kvy kv0, then keepWithin's squared bounds
;; surelyAbove surelyUnder surelyBelow surelyOver lowIn lowOut highIn highOut, then max(surelyAbove, lowOut) and
;; min(surelyUnder, highIn): between them a pair is surely kept and not near a bound). The sums' vector constants at 2560:
;; [shiftX shiftY], half and cellsPerUnit in both lanes (stored by each call), then 2^52 twice, 127 twice (f64)
;; and the |·| mask (the data segment). The loop reads them from memory: V8 then uses them as operands, where in
;; locals it spilled or rebuilt them every iteration (about 8 % fewer cycles).
;; For int16 pairs (`sums16`, `gate16`): x at 90112 and y at 98304 (4096 int16 each), and the cell tables (`tables`)
;; at 131072 (columns) and 262144 (rows), 65536 u16 each.
(module
  (memory (export "memory") 6)
  (data (i32.const 2608) "\00\00\00\00\00\00\30\43\00\00\00\00\00\00\30\43\00\00\00\00\00\c0\5f\40\00\00\00\00\00\c0\5f\40\ff\ff\ff\ff\ff\ff\ff\7f\ff\ff\ff\ff\ff\ff\ff\7f")

  ;; sums(i, n, shiftX, shiftY, half, cellsPerUnit): adds pairs i.. of the loaded n to the running sums and marks
  ;; their grid cells' bytes, skipping (and counting) non-finite pairs. Returns n at the end, or −(k + 1) after
  ;; summing a pair k that falls outside the grid (|u| or |v| >= half): the caller marks it (zooming the grid out)
  ;; and continues at k + 1.
  (func (export "sums") (param $i i32) (param $n i32) (param $sx f64) (param $sy f64) (param $half f64) (param $cpu f64) (result i32)
    (local $p i32) (local $inside i32) (local $skipped i32) (local $result i32)
    (local $w v128) (local $raw v128) (local $d2a v128) (local $d2c v128)
    (local $suu v128) (local $svv v128) (local $cells v128)
    (local $a0 v128) (local $a1 v128) (local $a2 v128) (local $a3 v128)
    (local $a4 v128) (local $a5 v128) (local $a6 v128) (local $a7 v128)
    (v128.store offset=2560 (i32.const 0) (f64x2.replace_lane 1 (f64x2.splat (local.get $sx)) (local.get $sy)))
    (v128.store offset=2576 (i32.const 0) (f64x2.splat (local.get $half)))
    (v128.store offset=2592 (i32.const 0) (f64x2.splat (local.get $cpu)))
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
        (local.set $raw (v128.load64_lane offset=36864 1 (local.get $p) (v128.load64_zero offset=4096 (local.get $p))))
        (local.set $i (i32.add (local.get $i) (i32.const 1)))
        (local.set $w (f64x2.sub (local.get $raw) (v128.load offset=2560 (i32.const 0))))
        ;; Inside the grid (|u|, |v| < half, so both finite): summed and marked here. Else a non-finite pair is
        ;; skipped and counted, and a finite one summed and handed back to the caller.
        (local.set $inside (i32.eq (i64x2.bitmask (f64x2.lt (v128.and (local.get $w) (v128.load offset=2640 (i32.const 0))) (v128.load offset=2576 (i32.const 0)))) (i32.const 3)))
        (if (i32.eqz (local.get $inside))
          (then
            ;; x − x is 0 for a finite x, NaN for ±Infinity and NaN.
            (if (i32.ne (i64x2.bitmask (f64x2.eq (f64x2.sub (local.get $raw) (local.get $raw)) (v128.const i64x2 0 0))) (i32.const 3))
              (then
                (local.set $skipped (i32.add (local.get $skipped) (i32.const 1)))
                (br $next)))))
        ;; w = [u v]; [uu uv] [uv vv], then [uu uu] and [vv vv]: the core's products, as the core groups them.
        (local.set $d2a (f64x2.mul (i8x16.shuffle 0 1 2 3 4 5 6 7 0 1 2 3 4 5 6 7 (local.get $w) (local.get $w)) (local.get $w)))
        (local.set $d2c (f64x2.mul (i8x16.shuffle 8 9 10 11 12 13 14 15 8 9 10 11 12 13 14 15 (local.get $w) (local.get $w)) (local.get $w)))
        (local.set $suu (i8x16.shuffle 0 1 2 3 4 5 6 7 0 1 2 3 4 5 6 7 (local.get $d2a) (local.get $d2a)))
        (local.set $svv (i8x16.shuffle 8 9 10 11 12 13 14 15 8 9 10 11 12 13 14 15 (local.get $d2c) (local.get $d2c)))
        (local.set $a0 (f64x2.add (local.get $a0) (local.get $w)))
        (local.set $a1 (f64x2.add (local.get $a1) (local.get $d2a)))
        (local.set $a2 (f64x2.add (local.get $a2) (local.get $d2c)))
        (local.set $a3 (f64x2.add (local.get $a3) (f64x2.mul (local.get $suu) (local.get $w))))
        (local.set $a4 (f64x2.add (local.get $a4) (f64x2.mul (local.get $svv) (local.get $w))))
        (local.set $a5 (f64x2.add (local.get $a5) (f64x2.mul (local.get $suu) (local.get $d2a))))
        (local.set $a6 (f64x2.add (local.get $a6) (f64x2.mul (local.get $svv) (local.get $d2a))))
        (local.set $a7 (f64x2.add (local.get $a7) (f64x2.mul (local.get $svv) (local.get $svv))))
        (if (local.get $inside)
          (then
            ;; The grid cell, as the core's mark: min(127, floor((u + half)·cellsPerUnit)), the min taken on the
            ;; doubles (an infinite product, from a grid narrower than 128/MAX_VALUE, is cell 127 as in the core);
            ;; + 2^52 then holds the cell in the low 32 bits.
            (local.set $cells (f64x2.add (f64x2.min (f64x2.floor (f64x2.mul (f64x2.add (local.get $w) (v128.load offset=2576 (i32.const 0))) (v128.load offset=2592 (i32.const 0))))
                                                    (v128.load offset=2624 (i32.const 0)))
                                         (v128.load offset=2608 (i32.const 0))))
            (i32.store8 offset=69632
              (i32.or (i32.shl (i32x4.extract_lane 2 (local.get $cells)) (i32.const 7)) (i32x4.extract_lane 0 (local.get $cells)))
              (i32.const 128))
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

  ;; sums16(i, n, shiftX, shiftY, off): `sums` over int16 pairs (x at 90112, y at 98304, 4096 each), all finite;
  ;; the grid cell of each from the tables (`tables`, for this shift and grid), in place of the five operations on
  ;; doubles that compute it; `off` 0x8000 takes every pair as off the grid (no grid yet: no tables needed). int16 to f64 is exact, so the sums and marks are those of `sums` over the same values.
  (func (export "sums16") (param $i i32) (param $n i32) (param $sx f64) (param $sy f64) (param $off i32) (result i32)
    (local $p i32) (local $x i32) (local $y i32) (local $cell i32) (local $result i32)
    (local $w v128) (local $raw v128) (local $d2a v128) (local $d2c v128)
    (local $suu v128) (local $svv v128) (local $cells v128)
    (local $a0 v128) (local $a1 v128) (local $a2 v128) (local $a3 v128)
    (local $a4 v128) (local $a5 v128) (local $a6 v128) (local $a7 v128)
    (v128.store offset=2560 (i32.const 0) (f64x2.replace_lane 1 (f64x2.splat (local.get $sx)) (local.get $sy)))
    (local.set $a0 (v128.load offset=2048 (i32.const 0)))
    (local.set $a1 (v128.load offset=2064 (i32.const 0)))
    (local.set $a2 (v128.load offset=2080 (i32.const 0)))
    (local.set $a3 (v128.load offset=2096 (i32.const 0)))
    (local.set $a4 (v128.load offset=2112 (i32.const 0)))
    (local.set $a5 (v128.load offset=2128 (i32.const 0)))
    (local.set $a6 (v128.load offset=2144 (i32.const 0)))
    (local.set $a7 (v128.load offset=2160 (i32.const 0)))
    (local.set $result (local.get $n))
    (block $out
      (loop $next
        (br_if $out (i32.ge_s (local.get $i) (local.get $n)))
        (local.set $p (i32.shl (local.get $i) (i32.const 1)))
        (local.set $x (i32.load16_s offset=90112 (local.get $p)))
        (local.set $y (i32.load16_s offset=98304 (local.get $p)))
        (local.set $raw (f64x2.convert_low_i32x4_s (i32x4.replace_lane 1 (i32x4.splat (local.get $x)) (local.get $y))))
        ;; The cell (row·128 + column), or bit 15 when the pair is off the grid, from the tables.
        (local.set $cell (i32.or (i32.or (i32.load16_u offset=131072 (i32.shl (i32.and (local.get $x) (i32.const 0xffff)) (i32.const 1)))
                                         (i32.load16_u offset=262144 (i32.shl (i32.and (local.get $y) (i32.const 0xffff)) (i32.const 1))))
                                 (local.get $off)))
        (local.set $i (i32.add (local.get $i) (i32.const 1)))
        (local.set $w (f64x2.sub (local.get $raw) (v128.load offset=2560 (i32.const 0))))
        ;; w = [u v]; [uu uv] [uv vv], then [uu uu] and [vv vv]: the core's products, as the core groups them.
        (local.set $d2a (f64x2.mul (i8x16.shuffle 0 1 2 3 4 5 6 7 0 1 2 3 4 5 6 7 (local.get $w) (local.get $w)) (local.get $w)))
        (local.set $d2c (f64x2.mul (i8x16.shuffle 8 9 10 11 12 13 14 15 8 9 10 11 12 13 14 15 (local.get $w) (local.get $w)) (local.get $w)))
        (local.set $suu (i8x16.shuffle 0 1 2 3 4 5 6 7 0 1 2 3 4 5 6 7 (local.get $d2a) (local.get $d2a)))
        (local.set $svv (i8x16.shuffle 8 9 10 11 12 13 14 15 8 9 10 11 12 13 14 15 (local.get $d2c) (local.get $d2c)))
        (local.set $a0 (f64x2.add (local.get $a0) (local.get $w)))
        (local.set $a1 (f64x2.add (local.get $a1) (local.get $d2a)))
        (local.set $a2 (f64x2.add (local.get $a2) (local.get $d2c)))
        (local.set $a3 (f64x2.add (local.get $a3) (f64x2.mul (local.get $suu) (local.get $w))))
        (local.set $a4 (f64x2.add (local.get $a4) (f64x2.mul (local.get $svv) (local.get $w))))
        (local.set $a5 (f64x2.add (local.get $a5) (f64x2.mul (local.get $suu) (local.get $d2a))))
        (local.set $a6 (f64x2.add (local.get $a6) (f64x2.mul (local.get $svv) (local.get $d2a))))
        (local.set $a7 (f64x2.add (local.get $a7) (f64x2.mul (local.get $svv) (local.get $svv))))
        (if (i32.eqz (i32.and (local.get $cell) (i32.const 0x8000)))
          (then
            (i32.store8 offset=69632 (local.get $cell) (i32.const 128))
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
    (local.get $result))

  ;; tables(shiftX, shiftY, half, cellsPerUnit): for every int16 value t, at 131072 + 2·(t & 0xffff) the column
  ;; min(127, floor((t − shiftX + half)·cellsPerUnit)) of an x of t, at 262144 + 2·(t & 0xffff) the row of a y
  ;; of t times 128 (the same with shiftY), each 0x8000 when |t − shift| >= half (off the grid): `sums`' cell
  ;; and test, the same operations on the same doubles.
  (func (export "tables") (param $sx f64) (param $sy f64) (param $half f64) (param $cpu f64)
    (local $t i32) (local $u f64)
    (local.set $t (i32.const -32768))
    (loop $next
      (local.set $u (f64.sub (f64.convert_i32_s (local.get $t)) (local.get $sx)))
      (i32.store16 offset=131072 (i32.shl (i32.and (local.get $t) (i32.const 0xffff)) (i32.const 1))
        (if (result i32) (f64.lt (f64.abs (local.get $u)) (local.get $half))
          (then (i32.trunc_f64_s (f64.min (f64.floor (f64.mul (f64.add (local.get $u) (local.get $half)) (local.get $cpu))) (f64.const 127))))
          (else (i32.const 0x8000))))
      (local.set $u (f64.sub (f64.convert_i32_s (local.get $t)) (local.get $sy)))
      (i32.store16 offset=262144 (i32.shl (i32.and (local.get $t) (i32.const 0xffff)) (i32.const 1))
        (if (result i32) (f64.lt (f64.abs (local.get $u)) (local.get $half))
          (then (i32.shl (i32.trunc_f64_s (f64.min (f64.floor (f64.mul (f64.add (local.get $u) (local.get $half)) (local.get $cpu))) (f64.const 127))) (i32.const 7)))
          (else (i32.const 0x8000))))
      (local.set $t (i32.add (local.get $t) (i32.const 1)))
      (br_if $next (i32.lt_s (local.get $t) (i32.const 32768)))))

  ;; flush(): ORs the marked cell bytes into the grid's bits, writes those bits at 86016 too, and clears the bytes.
  (func (export "flush")
    (local $w i32) (local $bits i32)
    (loop $word
      (local.set $bits (i32.or
        (i8x16.bitmask (v128.load offset=69632 (i32.shl (local.get $w) (i32.const 5))))
        (i32.shl (i8x16.bitmask (v128.load offset=69648 (i32.shl (local.get $w) (i32.const 5)))) (i32.const 16))))
      (i32.store offset=86016 (i32.shl (local.get $w) (i32.const 2)) (local.get $bits))
      (if (local.get $bits)
        (then
          (i32.store (i32.shl (local.get $w) (i32.const 2)) (i32.or (i32.load (i32.shl (local.get $w) (i32.const 2))) (local.get $bits)))
          (v128.store offset=69632 (i32.shl (local.get $w) (i32.const 5)) (v128.const i64x2 0 0))
          (v128.store offset=69648 (i32.shl (local.get $w) (i32.const 5)) (v128.const i64x2 0 0))))
      (local.set $w (i32.add (local.get $w) (i32.const 1)))
      (br_if $word (i32.lt_u (local.get $w) (i32.const 512)))))

;; gate(i, n): keepWithin (src/core/fit/two-pass.ts) over pairs i.. of the loaded n, two at a time, moving the kept
  ;; pairs down to the kept count (in place: a pair is read before anything is written over it) and counting those
  ;; near the bounds. u, v and u² + v² are computed as keepWithin computes them (a multiply, then adds, left to
  ;; right). Returns n at the end, else the index of a pair left to the caller, which decides it and continues after
  ;; it: one whose decision needs Math.hypot (u² + v² within a millionth of a bound; nothing is done for it or the
  ;; pair beside it), or the last of an odd count. A non-finite u² + v² is dropped (as hypot drops it) and not counted
  ;; near.
  (func (export "gate") (param $i i32) (param $n i32) (result i32)
    (local $p i32) (local $kept i32) (local $bits i32) (local $near v128)
    (local $x v128) (local $y v128) (local $u v128) (local $v v128) (local $r v128) (local $sure v128)
    (local.set $kept (i32.load offset=2180 (i32.const 0)))
    (block $out
      (loop $next
        (br_if $out (i32.ge_s (i32.add (local.get $i) (i32.const 1)) (local.get $n)))
        (local.set $p (i32.shl (local.get $i) (i32.const 3)))
        (local.set $x (v128.load offset=4096 (local.get $p)))
        (local.set $y (v128.load offset=36864 (local.get $p)))
        (local.set $u (f64x2.add (f64x2.mul (v128.load offset=2304 (i32.const 0)) (local.get $x))
                                 (v128.load offset=2320 (i32.const 0))))
        (local.set $v (f64x2.add (f64x2.add (f64x2.mul (v128.load offset=2336 (i32.const 0)) (local.get $x))
                                            (f64x2.mul (v128.load offset=2352 (i32.const 0)) (local.get $y)))
                                 (v128.load offset=2368 (i32.const 0))))
        (local.set $r (f64x2.add (f64x2.mul (local.get $u) (local.get $u)) (f64x2.mul (local.get $v) (local.get $v))))
        ;; Both well inside (the common case): kept, and not near a bound.
        (if (i32.eq (i64x2.bitmask (v128.and (f64x2.gt (local.get $r) (v128.load offset=2512 (i32.const 0)))
                                             (f64x2.lt (local.get $r) (v128.load offset=2528 (i32.const 0)))))
                    (i32.const 3))
          (then
            (local.set $p (i32.shl (local.get $kept) (i32.const 3)))
            (v128.store offset=4096 (local.get $p) (local.get $x))
            (v128.store offset=36864 (local.get $p) (local.get $y))
            (local.set $kept (i32.add (local.get $kept) (i32.const 2)))
            (local.set $i (i32.add (local.get $i) (i32.const 2)))
            (br $next)))
        (local.set $sure (v128.and
          (f64x2.gt (local.get $r) (v128.load offset=2384 (i32.const 0)))
          (f64x2.lt (local.get $r) (v128.load offset=2400 (i32.const 0)))))
        ;; Decided: surely kept, or surely dropped (under surelyBelow, over surelyOver, or NaN).
        (br_if $out (i32.ne (i64x2.bitmask (v128.or (local.get $sure)
          (v128.or (v128.or (f64x2.lt (local.get $r) (v128.load offset=2416 (i32.const 0)))
                            (f64x2.gt (local.get $r) (v128.load offset=2432 (i32.const 0))))
                   (f64x2.ne (local.get $r) (local.get $r)))))
          (i32.const 3)))
        ;; Near: not under lowIn, not over highOut, not between lowOut and highIn, and not NaN (a lane is −1).
        (local.set $near (i64x2.add (local.get $near) (v128.andnot
          (f64x2.eq (local.get $r) (local.get $r))
          (v128.or (v128.or (f64x2.lt (local.get $r) (v128.load offset=2448 (i32.const 0)))
                            (f64x2.gt (local.get $r) (v128.load offset=2496 (i32.const 0))))
                   (v128.and (f64x2.gt (local.get $r) (v128.load offset=2464 (i32.const 0)))
                             (f64x2.lt (local.get $r) (v128.load offset=2480 (i32.const 0))))))))
        (local.set $bits (i64x2.bitmask (local.get $sure)))
        (local.set $p (i32.shl (local.get $kept) (i32.const 3)))
        (v128.store64_lane offset=4096 0 (local.get $p) (local.get $x))
        (v128.store64_lane offset=36864 0 (local.get $p) (local.get $y))
        (local.set $kept (i32.add (local.get $kept) (i32.and (local.get $bits) (i32.const 1))))
        (local.set $p (i32.shl (local.get $kept) (i32.const 3)))
        (v128.store64_lane offset=4096 1 (local.get $p) (local.get $x))
        (v128.store64_lane offset=36864 1 (local.get $p) (local.get $y))
        (local.set $kept (i32.add (local.get $kept) (i32.shr_u (local.get $bits) (i32.const 1))))
        (local.set $i (i32.add (local.get $i) (i32.const 2)))
        (br $next)))
    (i32.store offset=2180 (i32.const 0) (local.get $kept))
    ;; The near lanes hold minus their counts.
    (i32.store offset=2184 (i32.const 0) (i32.sub (i32.load offset=2184 (i32.const 0))
      (i32.add (i32x4.extract_lane 0 (local.get $near)) (i32x4.extract_lane 2 (local.get $near)))))
    (local.get $i))

  ;; gate16(i, n): `gate` over int16 pairs (x at 90112, y at 98304), moving the kept pairs down as int16; each pair
  ;; widened to doubles first (exact), so the same decisions.
  (func (export "gate16") (param $i i32) (param $n i32) (result i32)
    (local $p i32) (local $kept i32) (local $bits i32) (local $near v128)
    (local $xs i32) (local $ys i32) (local $x v128) (local $y v128) (local $u v128) (local $v v128) (local $r v128) (local $sure v128)
    (local.set $kept (i32.load offset=2180 (i32.const 0)))
    (block $out
      (loop $next
        (br_if $out (i32.ge_s (i32.add (local.get $i) (i32.const 1)) (local.get $n)))
        (local.set $p (i32.shl (local.get $i) (i32.const 1)))
        ;; Two x (and two y) as the halves of an i32, then widened to two i32 lanes and to doubles.
        (local.set $xs (i32.load offset=90112 (local.get $p)))
        (local.set $ys (i32.load offset=98304 (local.get $p)))
        (local.set $x (f64x2.convert_low_i32x4_s (i32x4.extend_low_i16x8_s (i32x4.splat (local.get $xs)))))
        (local.set $y (f64x2.convert_low_i32x4_s (i32x4.extend_low_i16x8_s (i32x4.splat (local.get $ys)))))
        (local.set $u (f64x2.add (f64x2.mul (v128.load offset=2304 (i32.const 0)) (local.get $x))
                                 (v128.load offset=2320 (i32.const 0))))
        (local.set $v (f64x2.add (f64x2.add (f64x2.mul (v128.load offset=2336 (i32.const 0)) (local.get $x))
                                            (f64x2.mul (v128.load offset=2352 (i32.const 0)) (local.get $y)))
                                 (v128.load offset=2368 (i32.const 0))))
        (local.set $r (f64x2.add (f64x2.mul (local.get $u) (local.get $u)) (f64x2.mul (local.get $v) (local.get $v))))
        ;; Both well inside (the common case): kept, and not near a bound.
        (if (i32.eq (i64x2.bitmask (v128.and (f64x2.gt (local.get $r) (v128.load offset=2512 (i32.const 0)))
                                             (f64x2.lt (local.get $r) (v128.load offset=2528 (i32.const 0)))))
                    (i32.const 3))
          (then
            ;; In place while no pair was dropped before these.
            (if (i32.ne (local.get $kept) (local.get $i))
              (then
                (local.set $p (i32.shl (local.get $kept) (i32.const 1)))
                (i32.store offset=90112 (local.get $p) (local.get $xs))
                (i32.store offset=98304 (local.get $p) (local.get $ys))))
            (local.set $kept (i32.add (local.get $kept) (i32.const 2)))
            (local.set $i (i32.add (local.get $i) (i32.const 2)))
            (br $next)))
        (local.set $sure (v128.and
          (f64x2.gt (local.get $r) (v128.load offset=2384 (i32.const 0)))
          (f64x2.lt (local.get $r) (v128.load offset=2400 (i32.const 0)))))
        ;; Decided: surely kept, or surely dropped (under surelyBelow, over surelyOver, or NaN).
        (br_if $out (i32.ne (i64x2.bitmask (v128.or (local.get $sure)
          (v128.or (v128.or (f64x2.lt (local.get $r) (v128.load offset=2416 (i32.const 0)))
                            (f64x2.gt (local.get $r) (v128.load offset=2432 (i32.const 0))))
                   (f64x2.ne (local.get $r) (local.get $r)))))
          (i32.const 3)))
        ;; Near: not under lowIn, not over highOut, not between lowOut and highIn, and not NaN (a lane is −1).
        (local.set $near (i64x2.add (local.get $near) (v128.andnot
          (f64x2.eq (local.get $r) (local.get $r))
          (v128.or (v128.or (f64x2.lt (local.get $r) (v128.load offset=2448 (i32.const 0)))
                            (f64x2.gt (local.get $r) (v128.load offset=2496 (i32.const 0))))
                   (v128.and (f64x2.gt (local.get $r) (v128.load offset=2464 (i32.const 0)))
                             (f64x2.lt (local.get $r) (v128.load offset=2480 (i32.const 0))))))))
        (local.set $bits (i64x2.bitmask (local.get $sure)))
        (local.set $p (i32.shl (local.get $kept) (i32.const 1)))
        (i32.store16 offset=90112 (local.get $p) (local.get $xs))
        (i32.store16 offset=98304 (local.get $p) (local.get $ys))
        (local.set $kept (i32.add (local.get $kept) (i32.and (local.get $bits) (i32.const 1))))
        (local.set $p (i32.shl (local.get $kept) (i32.const 1)))
        (i32.store16 offset=90112 (local.get $p) (i32.shr_u (local.get $xs) (i32.const 16)))
        (i32.store16 offset=98304 (local.get $p) (i32.shr_u (local.get $ys) (i32.const 16)))
        (local.set $kept (i32.add (local.get $kept) (i32.shr_u (local.get $bits) (i32.const 1))))
        (local.set $i (i32.add (local.get $i) (i32.const 2)))
        (br $next)))
    (i32.store offset=2180 (i32.const 0) (local.get $kept))
    ;; The near lanes hold minus their counts.
    (i32.store offset=2184 (i32.const 0) (i32.sub (i32.load offset=2184 (i32.const 0))
      (i32.add (i32x4.extract_lane 0 (local.get $near)) (i32x4.extract_lane 2 (local.get $near)))))
    (local.get $i))
)
