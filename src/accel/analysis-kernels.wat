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
    (i32.shl (local.get $pairs) (i32.const 1)))
  ;; atan(x) and atan2(y, x) as V8's Math.atan and Math.atan2 compute them (base/ieee754.cc, from fdlibm's s_atan.c
  ;; and e_atan2.c): the same reduction, polynomial and constants, operation for operation, so the same doubles.
  (func $atan (param $x f64) (result f64)
    (local $hx i32) (local $ix i32) (local $id i32) (local $z f64) (local $w f64) (local $s f64) (local $hi f64) (local $lo f64)
    (local.set $hx (i32.wrap_i64 (i64.shr_u (i64.reinterpret_f64 (local.get $x)) (i64.const 32))))
    (local.set $ix (i32.and (local.get $hx) (i32.const 0x7fffffff)))
    (if (i32.ge_u (local.get $ix) (i32.const 0x44100000)) ;; |x| >= 2^66, or NaN
      (then
        (if (f64.ne (local.get $x) (local.get $x)) (then (return (f64.add (local.get $x) (local.get $x)))))
        (local.set $z (f64.add (f64.const 1.57079632679489655800e+00) (f64.const 6.12323399573676603587e-17)))
        (return (select (local.get $z) (f64.neg (local.get $z)) (i32.gt_s (local.get $hx) (i32.const 0))))))
    (if (i32.lt_u (local.get $ix) (i32.const 0x3fdc0000)) ;; |x| < 0.4375
      (then
        (if (i32.lt_u (local.get $ix) (i32.const 0x3e400000)) (then (return (local.get $x)))) ;; |x| < 2^-27
        (local.set $id (i32.const -1)))
      (else
        (local.set $x (f64.abs (local.get $x)))
        (if (i32.lt_u (local.get $ix) (i32.const 0x3ff30000)) ;; |x| < 1.1875
          (then
            (if (i32.lt_u (local.get $ix) (i32.const 0x3fe60000)) ;; 7/16 <= |x| < 11/16
              (then
                (local.set $id (i32.const 0))
                (local.set $x (f64.div (f64.sub (f64.mul (f64.const 2) (local.get $x)) (f64.const 1)) (f64.add (f64.const 2) (local.get $x)))))
              (else ;; 11/16 <= |x| < 19/16
                (local.set $id (i32.const 1))
                (local.set $x (f64.div (f64.sub (local.get $x) (f64.const 1)) (f64.add (local.get $x) (f64.const 1)))))))
          (else
            (if (i32.lt_u (local.get $ix) (i32.const 0x40038000)) ;; |x| < 2.4375
              (then
                (local.set $id (i32.const 2))
                (local.set $x (f64.div (f64.sub (local.get $x) (f64.const 1.5)) (f64.add (f64.const 1) (f64.mul (f64.const 1.5) (local.get $x))))))
              (else ;; 2.4375 <= |x| < 2^66
                (local.set $id (i32.const 3))
                (local.set $x (f64.div (f64.const -1) (local.get $x)))))))))
    (local.set $z (f64.mul (local.get $x) (local.get $x)))
    (local.set $w (f64.mul (local.get $z) (local.get $z)))
    ;; s1 + s2: z·(aT0 + w·(aT2 + w·(aT4 + …))) + w·(aT1 + w·(aT3 + …))
    (local.set $s (f64.add
      (f64.mul (local.get $z)
        (f64.add (f64.const 3.33333333333329318027e-01) (f64.mul (local.get $w) (f64.add (f64.const 1.42857142725034663711e-01) (f64.mul (local.get $w) (f64.add (f64.const 9.09088713343650656196e-02) (f64.mul (local.get $w) (f64.add (f64.const 6.66107313738753120669e-02) (f64.mul (local.get $w) (f64.add (f64.const 4.97687799461593236017e-02) (f64.mul (local.get $w) (f64.const 1.62858201153657823623e-02))))))))))))
      (f64.mul (local.get $w)
        (f64.add (f64.const -1.99999999998764832476e-01) (f64.mul (local.get $w) (f64.add (f64.const -1.11111104054623557880e-01) (f64.mul (local.get $w) (f64.add (f64.const -7.69187620504482999495e-02) (f64.mul (local.get $w) (f64.add (f64.const -5.83357013379057348645e-02) (f64.mul (local.get $w) (f64.const -3.65315727442169155270e-02))))))))))))
    (if (i32.lt_s (local.get $id) (i32.const 0)) (then (return (f64.sub (local.get $x) (f64.mul (local.get $x) (local.get $s))))))
    (local.set $hi (select (f64.const 4.63647609000806093515e-01)
      (select (f64.const 7.85398163397448278999e-01) (select (f64.const 9.82793723247329054082e-01) (f64.const 1.57079632679489655800e+00) (i32.eq (local.get $id) (i32.const 2))) (i32.eq (local.get $id) (i32.const 1)))
      (i32.eqz (local.get $id))))
    (local.set $lo (select (f64.const 2.26987774529616870924e-17)
      (select (f64.const 3.06161699786838301793e-17) (select (f64.const 1.39033110312309984516e-17) (f64.const 6.12323399573676603587e-17) (i32.eq (local.get $id) (i32.const 2))) (i32.eq (local.get $id) (i32.const 1)))
      (i32.eqz (local.get $id))))
    (local.set $z (f64.sub (local.get $hi) (f64.sub (f64.sub (f64.mul (local.get $x) (local.get $s)) (local.get $lo)) (local.get $x))))
    (select (f64.neg (local.get $z)) (local.get $z) (i32.lt_s (local.get $hx) (i32.const 0))))

  (func $atan2 (export "atan2") (param $y f64) (param $x f64) (result f64)
    (local $bx i64) (local $by i64) (local $hx i32) (local $hy i32) (local $ix i32) (local $iy i32) (local $lx i32) (local $ly i32)
    (local $m i32) (local $k i32) (local $z f64)
    (if (i32.or (f64.ne (local.get $x) (local.get $x)) (f64.ne (local.get $y) (local.get $y))) (then (return (f64.add (local.get $x) (local.get $y)))))
    (local.set $bx (i64.reinterpret_f64 (local.get $x)))
    (local.set $by (i64.reinterpret_f64 (local.get $y)))
    (local.set $hx (i32.wrap_i64 (i64.shr_u (local.get $bx) (i64.const 32))))
    (local.set $hy (i32.wrap_i64 (i64.shr_u (local.get $by) (i64.const 32))))
    (local.set $lx (i32.wrap_i64 (local.get $bx)))
    (local.set $ly (i32.wrap_i64 (local.get $by)))
    (local.set $ix (i32.and (local.get $hx) (i32.const 0x7fffffff)))
    (local.set $iy (i32.and (local.get $hy) (i32.const 0x7fffffff)))
    (if (i32.eqz (i32.or (i32.sub (local.get $hx) (i32.const 0x3ff00000)) (local.get $lx))) (then (return (call $atan (local.get $y))))) ;; x = 1
    ;; 2·sign(x) + sign(y)
    (local.set $m (i32.or (i32.and (i32.shr_s (local.get $hy) (i32.const 31)) (i32.const 1)) (i32.and (i32.shr_s (local.get $hx) (i32.const 30)) (i32.const 2))))
    (if (i32.eqz (i32.or (local.get $iy) (local.get $ly))) ;; y = ±0
      (then
        (if (i32.lt_u (local.get $m) (i32.const 2)) (then (return (local.get $y))))
        (return (select (f64.const 3.1415926535897931160E+00) (f64.const -3.1415926535897931160E+00) (i32.eq (local.get $m) (i32.const 2))))))
    (if (i32.eqz (i32.or (local.get $ix) (local.get $lx))) ;; x = ±0
      (then (return (select (f64.const -1.5707963267948965580E+00) (f64.const 1.5707963267948965580E+00) (i32.lt_s (local.get $hy) (i32.const 0))))))
    (if (i32.eq (local.get $ix) (i32.const 0x7ff00000)) ;; x = ±∞
      (then
        (if (i32.eq (local.get $iy) (i32.const 0x7ff00000))
          (then
            (local.set $z (select (f64.mul (f64.const 3) (f64.const 7.8539816339744827900E-01)) (f64.const 7.8539816339744827900E-01) (i32.ge_u (local.get $m) (i32.const 2))))
            (return (select (f64.neg (local.get $z)) (local.get $z) (i32.and (local.get $m) (i32.const 1))))))
        (local.set $z (select (f64.const 3.1415926535897931160E+00) (f64.const 0) (i32.ge_u (local.get $m) (i32.const 2))))
        (return (select (f64.neg (local.get $z)) (local.get $z) (i32.and (local.get $m) (i32.const 1))))))
    (if (i32.eq (local.get $iy) (i32.const 0x7ff00000)) ;; y = ±∞
      (then (return (select (f64.const -1.5707963267948965580E+00) (f64.const 1.5707963267948965580E+00) (i32.lt_s (local.get $hy) (i32.const 0))))))
    (local.set $k (i32.shr_s (i32.sub (local.get $iy) (local.get $ix)) (i32.const 20)))
    (if (i32.gt_s (local.get $k) (i32.const 60)) ;; |y/x| > 2^60
      (then
        (local.set $z (f64.add (f64.const 1.5707963267948965580E+00) (f64.mul (f64.const 0.5) (f64.const 1.2246467991473531772E-16))))
        (local.set $m (i32.and (local.get $m) (i32.const 1))))
      (else
        (if (i32.and (i32.lt_s (local.get $hx) (i32.const 0)) (i32.lt_s (local.get $k) (i32.const -60)))
          (then (local.set $z (f64.const 0)))
          (else (local.set $z (call $atan (f64.abs (f64.div (local.get $y) (local.get $x)))))))))
    (if (i32.eqz (local.get $m)) (then (return (local.get $z))))
    (if (i32.eq (local.get $m) (i32.const 1)) (then (return (f64.neg (local.get $z)))))
    (if (i32.eq (local.get $m) (i32.const 2))
      (then (return (f64.sub (f64.const 3.1415926535897931160E+00) (f64.sub (local.get $z) (f64.const 1.2246467991473531772E-16))))))
    (f64.sub (f64.sub (local.get $z) (f64.const 1.2246467991473531772E-16)) (f64.const 3.1415926535897931160E+00)))

  ;; prepare(n, binPerRad): what the residual's loop computes of each sample alone, two samples at a time: the
  ;; radius r = √(u² + v²) at 135680, [c s] = [u/r v/r] at 168448 and the phase bin position
  ;; (atan2(s, c) + π)·binPerRad at 233984 (f64 each, pairs for [c s]), for samples 0..n−1 (one beyond when n is odd).
  ;; atan2 of the general case (finite, non-zero c and s, c ≠ 1, |s/c| between 2^−60 and 2^60) runs in both lanes
  ;; at once, every branch of $atan computed and the lane's own picked, so each lane does exactly $atan's
  ;; operations; a pair with any other case goes through $atan2 lane by lane.
  (func $prepare (param $n i32) (param $binPerRad f64)
    (local $i i32) (local $o8 i32)
    (local $u v128) (local $v v128) (local $r v128) (local $c v128) (local $s v128) (local $t v128) (local $x v128)
    (local $z v128) (local $w v128) (local $sum v128) (local $hi v128) (local $lo v128) (local $k v128)
    (local $idNeg v128) (local $id0 v128) (local $id1 v128) (local $id2 v128) (local $tiny v128) (local $pos v128)
    (local $kbin v128) (local $pi v128)
    (local.set $kbin (f64x2.splat (local.get $binPerRad)))
    (local.set $pi (f64x2.splat (f64.const 3.141592653589793)))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $i) (local.get $n)))
        (local.set $o8 (i32.shl (local.get $i) (i32.const 3)))
        (local.set $u (v128.load (local.get $o8)))
        (local.set $v (v128.load offset=32768 (local.get $o8)))
        (local.set $r (f64x2.sqrt (f64x2.add (f64x2.mul (local.get $u) (local.get $u)) (f64x2.mul (local.get $v) (local.get $v)))))
        (local.set $c (f64x2.div (local.get $u) (local.get $r)))
        (local.set $s (f64x2.div (local.get $v) (local.get $r)))
        (v128.store offset=135680 (local.get $o8) (local.get $r))
        (v128.store offset=168448 (i32.shl (local.get $o8) (i32.const 1)) (i8x16.shuffle 0 1 2 3 4 5 6 7 16 17 18 19 20 21 22 23 (local.get $c) (local.get $s)))
        (v128.store offset=168464 (i32.shl (local.get $o8) (i32.const 1)) (i8x16.shuffle 8 9 10 11 12 13 14 15 24 25 26 27 28 29 30 31 (local.get $c) (local.get $s)))
        ;; k = (iy − ix) >> 20 of the high words without sign bits, per lane.
        (local.set $k (i64x2.shr_s (i64x2.sub
          (v128.and (i64x2.shr_u (local.get $s) (i32.const 32)) (v128.const i64x2 0x7fffffff 0x7fffffff))
          (v128.and (i64x2.shr_u (local.get $c) (i32.const 32)) (v128.const i64x2 0x7fffffff 0x7fffffff))) (i32.const 20)))
        (if (i32.and
              ;; both lanes: c, s finite and not 0 (|·| in (0, ∞)), c ≠ 1, −60 <= k <= 60
              (i64x2.all_true (v128.and
                (v128.and (f64x2.gt (f64x2.abs (local.get $c)) (v128.const f64x2 0 0)) (f64x2.lt (f64x2.abs (local.get $c)) (v128.const f64x2 inf inf)))
                (v128.and (f64x2.gt (f64x2.abs (local.get $s)) (v128.const f64x2 0 0)) (f64x2.lt (f64x2.abs (local.get $s)) (v128.const f64x2 inf inf)))))
              (i32.and
                (i64x2.all_true (f64x2.ne (local.get $c) (v128.const f64x2 1 1)))
                (i64x2.all_true (v128.and (i64x2.le_s (local.get $k) (v128.const i64x2 60 60)) (i64x2.ge_s (local.get $k) (v128.const i64x2 -60 -60))))))
          (then
            ;; $atan(t), t = |s/c|: the argument's reduction by its range (t >= 0, so no sign to restore).
            (local.set $t (f64x2.abs (f64x2.div (local.get $s) (local.get $c))))
            (local.set $tiny (f64x2.lt (local.get $t) (v128.const f64x2 7.450580596923828e-9 7.450580596923828e-9))) ;; 2^-27
            (local.set $idNeg (f64x2.lt (local.get $t) (v128.const f64x2 0.4375 0.4375)))
            (local.set $id0 (f64x2.lt (local.get $t) (v128.const f64x2 0.6875 0.6875)))
            (local.set $id1 (f64x2.lt (local.get $t) (v128.const f64x2 1.1875 1.1875)))
            (local.set $id2 (f64x2.lt (local.get $t) (v128.const f64x2 2.4375 2.4375)))
            ;; id 0: (2t − 1)/(2 + t); 1: (t − 1)/(t + 1); 2: (t − 1.5)/(1 + 1.5t); 3: −1/t; −1: t itself.
            (local.set $x (f64x2.div
              (v128.bitselect (f64x2.sub (f64x2.mul (v128.const f64x2 2 2) (local.get $t)) (v128.const f64x2 1 1))
                (v128.bitselect (f64x2.sub (local.get $t) (v128.const f64x2 1 1))
                  (v128.bitselect (f64x2.sub (local.get $t) (v128.const f64x2 1.5 1.5)) (v128.const f64x2 -1 -1) (local.get $id2))
                  (local.get $id1))
                (local.get $id0))
              (v128.bitselect (f64x2.add (v128.const f64x2 2 2) (local.get $t))
                (v128.bitselect (f64x2.add (local.get $t) (v128.const f64x2 1 1))
                  (v128.bitselect (f64x2.add (v128.const f64x2 1 1) (f64x2.mul (v128.const f64x2 1.5 1.5) (local.get $t))) (local.get $t) (local.get $id2))
                  (local.get $id1))
                (local.get $id0))))
            (local.set $x (v128.bitselect (local.get $t) (local.get $x) (local.get $idNeg)))
            (local.set $z (f64x2.mul (local.get $x) (local.get $x)))
            (local.set $w (f64x2.mul (local.get $z) (local.get $z)))
            (local.set $sum (f64x2.add
              (f64x2.mul (local.get $z)
                (f64x2.add (v128.const f64x2 3.33333333333329318027e-01 3.33333333333329318027e-01) (f64x2.mul (local.get $w) (f64x2.add (v128.const f64x2 1.42857142725034663711e-01 1.42857142725034663711e-01) (f64x2.mul (local.get $w) (f64x2.add (v128.const f64x2 9.09088713343650656196e-02 9.09088713343650656196e-02) (f64x2.mul (local.get $w) (f64x2.add (v128.const f64x2 6.66107313738753120669e-02 6.66107313738753120669e-02) (f64x2.mul (local.get $w) (f64x2.add (v128.const f64x2 4.97687799461593236017e-02 4.97687799461593236017e-02) (f64x2.mul (local.get $w) (v128.const f64x2 1.62858201153657823623e-02 1.62858201153657823623e-02))))))))))))
              (f64x2.mul (local.get $w)
                (f64x2.add (v128.const f64x2 -1.99999999998764832476e-01 -1.99999999998764832476e-01) (f64x2.mul (local.get $w) (f64x2.add (v128.const f64x2 -1.11111104054623557880e-01 -1.11111104054623557880e-01) (f64x2.mul (local.get $w) (f64x2.add (v128.const f64x2 -7.69187620504482999495e-02 -7.69187620504482999495e-02) (f64x2.mul (local.get $w) (f64x2.add (v128.const f64x2 -5.83357013379057348645e-02 -5.83357013379057348645e-02) (f64x2.mul (local.get $w) (v128.const f64x2 -3.65315727442169155270e-02 -3.65315727442169155270e-02))))))))))))
            (local.set $hi (v128.bitselect (v128.const f64x2 4.63647609000806093515e-01 4.63647609000806093515e-01)
              (v128.bitselect (v128.const f64x2 7.85398163397448278999e-01 7.85398163397448278999e-01)
                (v128.bitselect (v128.const f64x2 9.82793723247329054082e-01 9.82793723247329054082e-01) (v128.const f64x2 1.57079632679489655800e+00 1.57079632679489655800e+00) (local.get $id2))
                (local.get $id1))
              (local.get $id0)))
            (local.set $lo (v128.bitselect (v128.const f64x2 2.26987774529616870924e-17 2.26987774529616870924e-17)
              (v128.bitselect (v128.const f64x2 3.06161699786838301793e-17 3.06161699786838301793e-17)
                (v128.bitselect (v128.const f64x2 1.39033110312309984516e-17 1.39033110312309984516e-17) (v128.const f64x2 6.12323399573676603587e-17 6.12323399573676603587e-17) (local.get $id2))
                (local.get $id1))
              (local.get $id0)))
            ;; id −1: x − x·(s1 + s2); else hi − ((x·(s1 + s2) − lo) − x); t < 2^−27: t.
            (local.set $z (v128.bitselect
              (v128.bitselect (local.get $t) (f64x2.sub (local.get $x) (f64x2.mul (local.get $x) (local.get $sum))) (local.get $tiny))
              (f64x2.sub (local.get $hi) (f64x2.sub (f64x2.sub (f64x2.mul (local.get $x) (local.get $sum)) (local.get $lo)) (local.get $x)))
              (local.get $idNeg)))
            ;; $atan2's quadrants: c < 0 gives π − (z − π_lo), s < 0 the negative.
            (local.set $z (v128.bitselect
              (f64x2.sub (local.get $pi) (f64x2.sub (local.get $z) (v128.const f64x2 1.2246467991473531772E-16 1.2246467991473531772E-16)))
              (local.get $z)
              (f64x2.lt (local.get $c) (v128.const f64x2 0 0))))
            (local.set $z (v128.bitselect (f64x2.neg (local.get $z)) (local.get $z) (f64x2.lt (local.get $s) (v128.const f64x2 0 0)))))
          (else
            (local.set $z (f64x2.replace_lane 1
              (f64x2.splat (call $atan2 (f64x2.extract_lane 0 (local.get $s)) (f64x2.extract_lane 0 (local.get $c))))
              (call $atan2 (f64x2.extract_lane 1 (local.get $s)) (f64x2.extract_lane 1 (local.get $c)))))))
        (v128.store offset=233984 (local.get $o8) (f64x2.mul (f64x2.add (local.get $z) (local.get $pi)) (local.get $kbin)))
        (local.set $i (i32.add (local.get $i) (i32.const 2)))
        (br $next))))

  ;; residual(n, hasUse, bins, binPerRad): the radius residual's loop (src/core/fit/residual.ts, run) over samples
  ;; 0..n−1 of u at 0 and v at 32768 (f64, n <= 4096), use at 65536 (bytes, read when hasUse is not 0), updating
  ;; the state at 69888 (ResidualRun's layout: per bin Σ(r − 1) and count, then the noise cascade) and the sums at
  ;; 69632 (Σ(r − 1), count, [Σcos kφ Σsin kφ] for k = 1..8, Σr), each in the core's order of operations: `prepare`
  ;; first, then sample by sample what depends on the samples before.
  (global $SUMS i32 (i32.const 69632))
  (global $STATE i32 (i32.const 69888))
  (func (export "residual") (param $n i32) (param $hasUse i32) (param $bins i32) (param $binPerRad f64)
    (local $i i32) (local $o8 i32) (local $counts i32) (local $noise i32) (local $level i32) (local $at i32)
    (local $bin i32) (local $low i32) (local $high i32)
    (local $r f64) (local $res f64) (local $pos f64)
    (local $below f64) (local $lc f64) (local $hc f64) (local $locked f64) (local $t f64) (local $value f64) (local $d f64)
    (local $binsF f64) (local $sum f64) (local $count f64) (local $radiusSum f64)
    (local $k v128) (local $cc v128) (local $ss v128) (local $sign v128)
    (local $a1 v128) (local $a2 v128) (local $a3 v128) (local $a4 v128) (local $a5 v128) (local $a6 v128) (local $a7 v128) (local $a8 v128)
    (local.set $counts (i32.add (global.get $STATE) (i32.shl (local.get $bins) (i32.const 3))))
    (local.set $noise (i32.add (global.get $STATE) (i32.shl (local.get $bins) (i32.const 4))))
    (local.set $binsF (f64.convert_i32_u (local.get $bins)))
    (local.set $sign (v128.const f64x2 -1 1))
    (local.set $sum (f64.load (global.get $SUMS)))
    (local.set $count (f64.load offset=8 (global.get $SUMS)))
    (local.set $a1 (v128.load offset=16 (global.get $SUMS)))
    (local.set $a2 (v128.load offset=32 (global.get $SUMS)))
    (local.set $a3 (v128.load offset=48 (global.get $SUMS)))
    (local.set $a4 (v128.load offset=64 (global.get $SUMS)))
    (local.set $a5 (v128.load offset=80 (global.get $SUMS)))
    (local.set $a6 (v128.load offset=96 (global.get $SUMS)))
    (local.set $a7 (v128.load offset=112 (global.get $SUMS)))
    (local.set $a8 (v128.load offset=128 (global.get $SUMS)))
    (local.set $radiusSum (f64.load offset=144 (global.get $SUMS)))
    (call $prepare (local.get $n) (local.get $binPerRad))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $i) (local.get $n)))
        (local.set $o8 (i32.shl (local.get $i) (i32.const 3)))
        (local.set $r (f64.load offset=135680 (local.get $o8)))
        (local.set $i (i32.add (local.get $i) (i32.const 1)))
        (if (i32.and (local.get $hasUse) (i32.eqz (i32.load8_u offset=65535 (local.get $i)))) (then (br $next)))
        (br_if $next (i32.eqz (i32.and (f64.gt (local.get $r) (f64.const 0)) (f64.lt (local.get $r) (f64.const inf)))))
        (local.set $res (f64.sub (local.get $r) (f64.const 1)))
        (local.set $k (v128.load offset=168448 (i32.shl (local.get $o8) (i32.const 1))))
        (local.set $pos (f64.load offset=233984 (local.get $o8)))
        (local.set $bin (i32.trunc_f64_u (f64.min (f64.sub (local.get $binsF) (f64.const 1)) (f64.floor (local.get $pos)))))
        ;; lockedAt(position): the binned means so far, between the nearest filled bin centres.
        (local.set $below (f64.floor (f64.sub (local.get $pos) (f64.const 0.5))))
        (local.set $low (i32.rem_u (i32.trunc_f64_u (f64.add (local.get $below) (local.get $binsF))) (local.get $bins)))
        (local.set $high (i32.rem_u (i32.trunc_f64_u (f64.add (local.get $below) (f64.const 1))) (local.get $bins)))
        (local.set $lc (f64.load (i32.add (local.get $counts) (i32.shl (local.get $low) (i32.const 3)))))
        (local.set $hc (f64.load (i32.add (local.get $counts) (i32.shl (local.get $high) (i32.const 3)))))
        (if (i32.or (f64.eq (local.get $lc) (f64.const 0)) (f64.eq (local.get $hc) (f64.const 0)))
          (then
            (local.set $locked
              (if (result f64) (f64.gt (local.get $lc) (f64.const 0))
                (then (f64.div (f64.load (i32.add (global.get $STATE) (i32.shl (local.get $low) (i32.const 3)))) (local.get $lc)))
                (else
                  (if (result f64) (f64.gt (local.get $hc) (f64.const 0))
                    (then (f64.div (f64.load (i32.add (global.get $STATE) (i32.shl (local.get $high) (i32.const 3)))) (local.get $hc)))
                    (else (f64.const 0)))))))
          (else
            (local.set $t (f64.sub (f64.sub (local.get $pos) (f64.const 0.5)) (local.get $below)))
            (local.set $locked (f64.add
              (f64.mul (f64.sub (f64.const 1) (local.get $t)) (f64.div (f64.load (i32.add (global.get $STATE) (i32.shl (local.get $low) (i32.const 3)))) (local.get $lc)))
              (f64.mul (local.get $t) (f64.div (f64.load (i32.add (global.get $STATE) (i32.shl (local.get $high) (i32.const 3)))) (local.get $hc)))))))
        ;; pushNoise(residual − locked): previous at +0, has-previous +40, half +80, has-half +120, squares +160,
        ;; differences +200 of the noise state.
        (local.set $value (f64.sub (local.get $res) (local.get $locked)))
        (local.set $level (i32.const 0))
        (block $pushed
          (loop $cascade
            (br_if $pushed (i32.ge_u (local.get $level) (i32.const 5)))
            (local.set $at (i32.add (local.get $noise) (i32.shl (local.get $level) (i32.const 3))))
            (if (f64.ne (f64.load offset=40 (local.get $at)) (f64.const 0))
              (then
                (local.set $d (f64.sub (local.get $value) (f64.load (local.get $at))))
                (f64.store offset=160 (local.get $at) (f64.add (f64.load offset=160 (local.get $at)) (f64.mul (local.get $d) (local.get $d))))
                (f64.store offset=200 (local.get $at) (f64.add (f64.load offset=200 (local.get $at)) (f64.const 1)))))
            (f64.store (local.get $at) (local.get $value))
            (f64.store offset=40 (local.get $at) (f64.const 1))
            (if (f64.eq (f64.load offset=120 (local.get $at)) (f64.const 0))
              (then
                (f64.store offset=80 (local.get $at) (local.get $value))
                (f64.store offset=120 (local.get $at) (f64.const 1))
                (br $pushed)))
            (local.set $value (f64.mul (f64.const 0.5) (f64.add (f64.load offset=80 (local.get $at)) (local.get $value))))
            (f64.store offset=120 (local.get $at) (f64.const 0))
            (local.set $level (i32.add (local.get $level) (i32.const 1)))
            (br $cascade)))
        (local.set $at (i32.shl (local.get $bin) (i32.const 3)))
        (f64.store (i32.add (global.get $STATE) (local.get $at)) (f64.add (f64.load (i32.add (global.get $STATE) (local.get $at))) (local.get $res)))
        (f64.store (i32.add (local.get $counts) (local.get $at)) (f64.add (f64.load (i32.add (local.get $counts) (local.get $at))) (f64.const 1)))
        (local.set $sum (f64.add (local.get $sum) (local.get $res)))
        ;; [cos kφ, sin kφ] for k = 1..8 by angle addition, as in the core.
        (local.set $cc (i8x16.shuffle 0 1 2 3 4 5 6 7 0 1 2 3 4 5 6 7 (local.get $k) (local.get $k)))
        (local.set $ss (f64x2.mul (local.get $sign) (i8x16.shuffle 8 9 10 11 12 13 14 15 8 9 10 11 12 13 14 15 (local.get $k) (local.get $k))))
        (local.set $a1 (f64x2.add (local.get $a1) (local.get $k)))
        (local.set $k (f64x2.add (f64x2.mul (local.get $k) (local.get $cc)) (f64x2.mul (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $k) (local.get $k)) (local.get $ss))))
        (local.set $a2 (f64x2.add (local.get $a2) (local.get $k)))
        (local.set $k (f64x2.add (f64x2.mul (local.get $k) (local.get $cc)) (f64x2.mul (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $k) (local.get $k)) (local.get $ss))))
        (local.set $a3 (f64x2.add (local.get $a3) (local.get $k)))
        (local.set $k (f64x2.add (f64x2.mul (local.get $k) (local.get $cc)) (f64x2.mul (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $k) (local.get $k)) (local.get $ss))))
        (local.set $a4 (f64x2.add (local.get $a4) (local.get $k)))
        (local.set $k (f64x2.add (f64x2.mul (local.get $k) (local.get $cc)) (f64x2.mul (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $k) (local.get $k)) (local.get $ss))))
        (local.set $a5 (f64x2.add (local.get $a5) (local.get $k)))
        (local.set $k (f64x2.add (f64x2.mul (local.get $k) (local.get $cc)) (f64x2.mul (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $k) (local.get $k)) (local.get $ss))))
        (local.set $a6 (f64x2.add (local.get $a6) (local.get $k)))
        (local.set $k (f64x2.add (f64x2.mul (local.get $k) (local.get $cc)) (f64x2.mul (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $k) (local.get $k)) (local.get $ss))))
        (local.set $a7 (f64x2.add (local.get $a7) (local.get $k)))
        (local.set $k (f64x2.add (f64x2.mul (local.get $k) (local.get $cc)) (f64x2.mul (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $k) (local.get $k)) (local.get $ss))))
        (local.set $a8 (f64x2.add (local.get $a8) (local.get $k)))
        (local.set $count (f64.add (local.get $count) (f64.const 1)))
        (local.set $radiusSum (f64.add (local.get $radiusSum) (local.get $r)))
        (br $next)))
    (f64.store (global.get $SUMS) (local.get $sum))
    (f64.store offset=8 (global.get $SUMS) (local.get $count))
    (v128.store offset=16 (global.get $SUMS) (local.get $a1))
    (v128.store offset=32 (global.get $SUMS) (local.get $a2))
    (v128.store offset=48 (global.get $SUMS) (local.get $a3))
    (v128.store offset=64 (global.get $SUMS) (local.get $a4))
    (v128.store offset=80 (global.get $SUMS) (local.get $a5))
    (v128.store offset=96 (global.get $SUMS) (local.get $a6))
    (v128.store offset=112 (global.get $SUMS) (local.get $a7))
    (v128.store offset=128 (global.get $SUMS) (local.get $a8))
    (f64.store offset=144 (global.get $SUMS) (local.get $radiusSum)))
;; bin_errors(n, hasUse, bins, binPerRad): the periodic-error analyzer's binning (src/core/periodic-error.ts,
  ;; createPeriodicErrorAnalyzer's add) of samples 0..n−1: phase at 0 and error at 32768 (f64, n <= 4096), use at
  ;; 65536 (bytes, read when hasUse is not 0), the bins' sums at 69632 and counts at 102400 (f64, bins <= 4096).
  (func (export "bin_errors") (param $n i32) (param $hasUse i32) (param $bins i32) (param $binPerRad f64)
    (local $i i32) (local $o8 i32) (local $at i32) (local $phase f64) (local $error f64) (local $bin f64) (local $last f64)
    (local.set $last (f64.convert_i32_u (i32.sub (local.get $bins) (i32.const 1))))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $i) (local.get $n)))
        (local.set $o8 (i32.shl (local.get $i) (i32.const 3)))
        (local.set $phase (f64.load (local.get $o8)))
        (local.set $error (f64.load offset=32768 (local.get $o8)))
        (local.set $i (i32.add (local.get $i) (i32.const 1)))
        (if (i32.and (local.get $hasUse) (i32.eqz (i32.load8_u offset=65535 (local.get $i)))) (then (br $next)))
        ;; Finite: x − x is 0 (NaN for ±∞ and NaN).
        (br_if $next (i32.eqz (i32.and
          (f64.eq (f64.sub (local.get $phase) (local.get $phase)) (f64.const 0))
          (f64.eq (f64.sub (local.get $error) (local.get $error)) (f64.const 0)))))
        (local.set $bin (f64.min (local.get $last) (f64.floor (f64.mul
          (f64.sub (local.get $phase) (f64.mul (f64.const 6.283185307179586) (f64.floor (f64.div (local.get $phase) (f64.const 6.283185307179586)))))
          (local.get $binPerRad)))))
        ;; A bin below 0 (a phase a rounding below a whole turn): a typed array's store there does nothing.
        (br_if $next (f64.lt (local.get $bin) (f64.const 0)))
        (local.set $at (i32.shl (i32.trunc_f64_u (local.get $bin)) (i32.const 3)))
        (f64.store offset=69632 (local.get $at) (f64.add (f64.load offset=69632 (local.get $at)) (local.get $error)))
        (f64.store offset=102400 (local.get $at) (f64.add (f64.load offset=102400 (local.get $at)) (f64.const 1)))
        (br $next))))
)
