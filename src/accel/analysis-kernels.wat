;; The per-sample sums of the phase-domain estimator's windows (src/core/periodic-error.ts, windowSums) in
;; WebAssembly SIMD, to the bit. A vector holds the cosine and the sine of one order, [cos kφ, sin kφ], so each of
;; its sums is a sequential sum over the samples in their order and nothing is regrouped: the rotation to the next
;; order, (c·co − s·so, s·co + c·so), is [c s]·[co co] + [s c]·[−so so], the same products and sums (a − b is
;; a + (−b) in IEEE arithmetic), and WebAssembly has no fused multiply-add.
;; Build: node scripts/build-accel.mjs (writes analysis-kernels-wasm.ts).
;;
;; Memory, for windows of up to N samples (the caller grows it to 104·N + 1024 bytes): the window's phase at 0
;; (N f64), [cos d, sin d] of its offsets d = φ − φ₀ at 8N (N pairs, from the caller: Math.cos and Math.sin stay
;; JavaScript's), then the kernel's own: [cos kφ, sin kφ] at 24N, [cos φ, cos φ] at 40N, [−sin φ, sin φ] at 56N,
;; the basis polynomials q1, q2, q3 and the offsets d at 72N, 80N, 88N, 96N (N f64 each); the sums out at 104N.
(module
  (memory (export "memory") 1)

  ;; window_sums(n, N, orders, origin, cosOrigin, sinOrigin, centre, a2, a3, w0, w1, w2, w3): writes at 104N
  ;; p0 p1 p2 p3, Σd², the second differences' Σ, then per order k = 1..orders [Σcos Σsin] and the pairs' dot
  ;; products with w0, q1, q2, q3 and d, then per order k = orders+1..2·orders [Σcos Σsin] (f64 each).
  (func (export "window_sums")
    (param $n i32) (param $cap i32) (param $orders i32)
    (param $origin f64) (param $cosOrigin f64) (param $sinOrigin f64)
    (param $centre f64) (param $a2 f64) (param $a3 f64) (param $w0 f64) (param $w1 f64) (param $w2 f64) (param $w3 f64)
    (local $j i32) (local $o8 i32) (local $o16 i32) (local $out i32) (local $order i32)
    (local $trig i32) (local $vk i32) (local $cc i32) (local $ss i32) (local $q1p i32) (local $q2p i32) (local $q3p i32) (local $dp i32)
    (local $p f64) (local $d f64) (local $x f64) (local $x2 f64) (local $q1 f64) (local $q2 f64) (local $q3 f64)
    (local $p0 f64) (local $p1 f64) (local $p2 f64) (local $p3 f64) (local $squares f64) (local $curvature f64)
    (local $before f64) (local $beforeThat f64) (local $t f64)
    (local $o v128) (local $osw v128) (local $v v128) (local $sign v128) (local $kw0 v128)
    (local $as v128) (local $b0 v128) (local $b1 v128) (local $b2 v128) (local $b3 v128) (local $bd v128)
    (local.set $trig (i32.shl (local.get $cap) (i32.const 3)))
    (local.set $vk (i32.mul (local.get $cap) (i32.const 24)))
    (local.set $cc (i32.mul (local.get $cap) (i32.const 40)))
    (local.set $ss (i32.mul (local.get $cap) (i32.const 56)))
    (local.set $q1p (i32.mul (local.get $cap) (i32.const 72)))
    (local.set $q2p (i32.mul (local.get $cap) (i32.const 80)))
    (local.set $q3p (i32.mul (local.get $cap) (i32.const 88)))
    (local.set $dp (i32.mul (local.get $cap) (i32.const 96)))
    (local.set $out (i32.mul (local.get $cap) (i32.const 104)))
    ;; [cosφ₀ sinφ₀], [sinφ₀ cosφ₀]; [−1 1] makes [−so so] of a splat so.
    (local.set $o (f64x2.replace_lane 1 (f64x2.splat (local.get $cosOrigin)) (local.get $sinOrigin)))
    (local.set $osw (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $o) (local.get $o)))
    (local.set $sign (v128.const f64x2 -1 1))
    (local.set $kw0 (f64x2.splat (local.get $w0)))
    (local.set $before (local.get $origin))
    (local.set $beforeThat (local.get $origin))
    ;; The first pass: cos φ, sin φ by angle addition from φ₀ and d, the basis, the phase's sums.
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $j) (local.get $n)))
        (local.set $o8 (i32.shl (local.get $j) (i32.const 3)))
        (local.set $o16 (i32.shl (local.get $j) (i32.const 4)))
        (local.set $p (f64.load (local.get $o8)))
        (local.set $d (f64.sub (local.get $p) (local.get $origin)))
        ;; [cosφ₀·cos d − sinφ₀·sin d, sinφ₀·cos d + cosφ₀·sin d]
        (local.set $v (f64x2.add
          (f64x2.mul (local.get $o) (v128.load64_splat (i32.add (local.get $trig) (local.get $o16))))
          (f64x2.mul (local.get $osw) (f64x2.mul (local.get $sign) (v128.load64_splat offset=8 (i32.add (local.get $trig) (local.get $o16)))))))
        (v128.store (i32.add (local.get $vk) (local.get $o16)) (local.get $v))
        (v128.store (i32.add (local.get $cc) (local.get $o16)) (i8x16.shuffle 0 1 2 3 4 5 6 7 0 1 2 3 4 5 6 7 (local.get $v) (local.get $v)))
        (v128.store (i32.add (local.get $ss) (local.get $o16))
          (f64x2.mul (local.get $sign) (i8x16.shuffle 8 9 10 11 12 13 14 15 8 9 10 11 12 13 14 15 (local.get $v) (local.get $v))))
        (local.set $x (f64.sub (f64.convert_i32_u (local.get $j)) (local.get $centre)))
        (local.set $x2 (f64.mul (local.get $x) (local.get $x)))
        (local.set $q1 (f64.mul (local.get $x) (local.get $w1)))
        (local.set $q2 (f64.mul (f64.sub (local.get $x2) (local.get $a2)) (local.get $w2)))
        (local.set $q3 (f64.mul (f64.mul (f64.sub (local.get $x2) (local.get $a3)) (local.get $x)) (local.get $w3)))
        (f64.store (i32.add (local.get $q1p) (local.get $o8)) (local.get $q1))
        (f64.store (i32.add (local.get $q2p) (local.get $o8)) (local.get $q2))
        (f64.store (i32.add (local.get $q3p) (local.get $o8)) (local.get $q3))
        (f64.store (i32.add (local.get $dp) (local.get $o8)) (local.get $d))
        (local.set $p0 (f64.add (local.get $p0) (f64.mul (local.get $w0) (local.get $d))))
        (local.set $p1 (f64.add (local.get $p1) (f64.mul (local.get $q1) (local.get $d))))
        (local.set $p2 (f64.add (local.get $p2) (f64.mul (local.get $q2) (local.get $d))))
        (local.set $p3 (f64.add (local.get $p3) (f64.mul (local.get $q3) (local.get $d))))
        (local.set $squares (f64.add (local.get $squares) (f64.mul (local.get $d) (local.get $d))))
        (if (i32.ge_u (local.get $j) (i32.const 2))
          (then
            (local.set $t (f64.add (f64.sub (local.get $p) (f64.mul (f64.const 2) (local.get $before))) (local.get $beforeThat)))
            (local.set $curvature (f64.add (local.get $curvature) (f64.mul (local.get $t) (local.get $t))))))
        (local.set $beforeThat (local.get $before))
        (local.set $before (local.get $p))
        (local.set $j (i32.add (local.get $j) (i32.const 1)))
        (br $next)))
    (f64.store (local.get $out) (local.get $p0))
    (f64.store offset=8 (local.get $out) (local.get $p1))
    (f64.store offset=16 (local.get $out) (local.get $p2))
    (f64.store offset=24 (local.get $out) (local.get $p3))
    (f64.store offset=32 (local.get $out) (local.get $squares))
    (f64.store offset=40 (local.get $out) (local.get $curvature))
    (local.set $out (i32.add (local.get $out) (i32.const 48)))
    ;; A pass per order: the pairs' sums and dot products, each in a vector.
    (local.set $order (i32.const 1))
    (block $lowDone
      (loop $low
        (br_if $lowDone (i32.gt_u (local.get $order) (local.get $orders)))
        (local.set $as (v128.const i64x2 0 0))
        (local.set $b0 (v128.const i64x2 0 0))
        (local.set $b1 (v128.const i64x2 0 0))
        (local.set $b2 (v128.const i64x2 0 0))
        (local.set $b3 (v128.const i64x2 0 0))
        (local.set $bd (v128.const i64x2 0 0))
        (local.set $j (i32.const 0))
        (block $done
          (loop $next
            (br_if $done (i32.ge_u (local.get $j) (local.get $n)))
            (local.set $o8 (i32.shl (local.get $j) (i32.const 3)))
            (local.set $o16 (i32.shl (local.get $j) (i32.const 4)))
            (local.set $v (v128.load (i32.add (local.get $vk) (local.get $o16))))
            (if (i32.gt_u (local.get $order) (i32.const 1))
              (then
                (local.set $v (f64x2.add
                  (f64x2.mul (local.get $v) (v128.load (i32.add (local.get $cc) (local.get $o16))))
                  (f64x2.mul (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $v) (local.get $v)) (v128.load (i32.add (local.get $ss) (local.get $o16))))))
                (v128.store (i32.add (local.get $vk) (local.get $o16)) (local.get $v))))
            (local.set $as (f64x2.add (local.get $as) (local.get $v)))
            (local.set $b0 (f64x2.add (local.get $b0) (f64x2.mul (local.get $kw0) (local.get $v))))
            (local.set $b1 (f64x2.add (local.get $b1) (f64x2.mul (v128.load64_splat (i32.add (local.get $q1p) (local.get $o8))) (local.get $v))))
            (local.set $b2 (f64x2.add (local.get $b2) (f64x2.mul (v128.load64_splat (i32.add (local.get $q2p) (local.get $o8))) (local.get $v))))
            (local.set $b3 (f64x2.add (local.get $b3) (f64x2.mul (v128.load64_splat (i32.add (local.get $q3p) (local.get $o8))) (local.get $v))))
            (local.set $bd (f64x2.add (local.get $bd) (f64x2.mul (local.get $v) (v128.load64_splat (i32.add (local.get $dp) (local.get $o8))))))
            (local.set $j (i32.add (local.get $j) (i32.const 1)))
            (br $next)))
        (v128.store (local.get $out) (local.get $as))
        (v128.store offset=16 (local.get $out) (local.get $b0))
        (v128.store offset=32 (local.get $out) (local.get $b1))
        (v128.store offset=48 (local.get $out) (local.get $b2))
        (v128.store offset=64 (local.get $out) (local.get $b3))
        (v128.store offset=80 (local.get $out) (local.get $bd))
        (local.set $out (i32.add (local.get $out) (i32.const 96)))
        (local.set $order (i32.add (local.get $order) (i32.const 1)))
        (br $low)))
    ;; The higher orders: their sums only.
    (block $highDone
      (loop $high
        (br_if $highDone (i32.gt_u (local.get $order) (i32.shl (local.get $orders) (i32.const 1))))
        (local.set $as (v128.const i64x2 0 0))
        (local.set $j (i32.const 0))
        (block $done
          (loop $next
            (br_if $done (i32.ge_u (local.get $j) (local.get $n)))
            (local.set $o16 (i32.shl (local.get $j) (i32.const 4)))
            (local.set $v (v128.load (i32.add (local.get $vk) (local.get $o16))))
            (local.set $v (f64x2.add
              (f64x2.mul (local.get $v) (v128.load (i32.add (local.get $cc) (local.get $o16))))
              (f64x2.mul (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $v) (local.get $v)) (v128.load (i32.add (local.get $ss) (local.get $o16))))))
            (v128.store (i32.add (local.get $vk) (local.get $o16)) (local.get $v))
            (local.set $as (f64x2.add (local.get $as) (local.get $v)))
            (local.set $j (i32.add (local.get $j) (i32.const 1)))
            (br $next)))
        (v128.store (local.get $out) (local.get $as))
        (local.set $out (i32.add (local.get $out) (i32.const 16)))
        (local.set $order (i32.add (local.get $order) (i32.const 1)))
        (br $high))))

  ;; chunk_pairs(pairs, radiusPtr, outPtr) -> chunks summed: the model watch's chunks (src/core/fit/model-watch.ts, 16
  ;; radii each) two at a time, chunk 2p in lane 0 and 2p + 1 in lane 1 of [Σr] and [Σr²], from the f32 radii at
  ;; radiusPtr; out at outPtr + 16c, [Σr Σr²] of chunk c. Stops at the first chunk with a radius not in (0, ∞).
  (func (export "chunk_pairs") (param $pairs i32) (param $rp i32) (param $op i32) (result i32)
    (local $p i32) (local $at i32) (local $k i32)
    (local $a v128) (local $b v128) (local $lo v128) (local $hi v128) (local $x v128)
    (local $s v128) (local $q v128) (local $badA v128) (local $badB v128) (local $zero v128) (local $inf v128)
    (local.set $inf (f32x4.splat (f32.const inf)))
    (block $done
      (loop $pair
        (br_if $done (i32.ge_u (local.get $p) (local.get $pairs)))
        (local.set $at (i32.add (local.get $rp) (i32.shl (local.get $p) (i32.const 7))))
        (local.set $s (local.get $zero))
        (local.set $q (local.get $zero))
        (local.set $badA (local.get $zero))
        (local.set $badB (local.get $zero))
        (local.set $k (i32.const 0))
        (loop $four
          ;; Four radii of each chunk, interleaved [a0 b0 a1 b1] [a2 b2 a3 b3], each pair widened and summed in order.
          (local.set $a (v128.load (i32.add (local.get $at) (local.get $k))))
          (local.set $b (v128.load offset=64 (i32.add (local.get $at) (local.get $k))))
          (local.set $badA (v128.or (local.get $badA) (v128.not (v128.and (f32x4.gt (local.get $a) (local.get $zero)) (f32x4.lt (local.get $a) (local.get $inf))))))
          (local.set $badB (v128.or (local.get $badB) (v128.not (v128.and (f32x4.gt (local.get $b) (local.get $zero)) (f32x4.lt (local.get $b) (local.get $inf))))))
          (local.set $lo (i8x16.shuffle 0 1 2 3 16 17 18 19 4 5 6 7 20 21 22 23 (local.get $a) (local.get $b)))
          (local.set $hi (i8x16.shuffle 8 9 10 11 24 25 26 27 12 13 14 15 28 29 30 31 (local.get $a) (local.get $b)))
          (local.set $x (f64x2.promote_low_f32x4 (local.get $lo)))
          (local.set $s (f64x2.add (local.get $s) (local.get $x)))
          (local.set $q (f64x2.add (local.get $q) (f64x2.mul (local.get $x) (local.get $x))))
          (local.set $x (f64x2.promote_low_f32x4 (i8x16.shuffle 8 9 10 11 12 13 14 15 8 9 10 11 12 13 14 15 (local.get $lo) (local.get $lo))))
          (local.set $s (f64x2.add (local.get $s) (local.get $x)))
          (local.set $q (f64x2.add (local.get $q) (f64x2.mul (local.get $x) (local.get $x))))
          (local.set $x (f64x2.promote_low_f32x4 (local.get $hi)))
          (local.set $s (f64x2.add (local.get $s) (local.get $x)))
          (local.set $q (f64x2.add (local.get $q) (f64x2.mul (local.get $x) (local.get $x))))
          (local.set $x (f64x2.promote_low_f32x4 (i8x16.shuffle 8 9 10 11 12 13 14 15 8 9 10 11 12 13 14 15 (local.get $hi) (local.get $hi))))
          (local.set $s (f64x2.add (local.get $s) (local.get $x)))
          (local.set $q (f64x2.add (local.get $q) (f64x2.mul (local.get $x) (local.get $x))))
          (local.set $k (i32.add (local.get $k) (i32.const 16)))
          (br_if $four (i32.lt_u (local.get $k) (i32.const 64))))
        (if (v128.any_true (local.get $badA)) (then (return (i32.shl (local.get $p) (i32.const 1)))))
        (v128.store (i32.add (local.get $op) (i32.shl (local.get $p) (i32.const 5)))
          (i8x16.shuffle 0 1 2 3 4 5 6 7 16 17 18 19 20 21 22 23 (local.get $s) (local.get $q)))
        (v128.store offset=16 (i32.add (local.get $op) (i32.shl (local.get $p) (i32.const 5)))
          (i8x16.shuffle 8 9 10 11 12 13 14 15 24 25 26 27 28 29 30 31 (local.get $s) (local.get $q)))
        (if (v128.any_true (local.get $badB)) (then (return (i32.add (i32.shl (local.get $p) (i32.const 1)) (i32.const 1)))))
        (local.set $p (i32.add (local.get $p) (i32.const 1)))
        (br $pair)))
    (i32.shl (local.get $pairs) (i32.const 1))))
