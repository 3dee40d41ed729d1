;; Front end of the fringetally pipeline in WebAssembly SIMD: correction, level, the quiet-block checks and the
;; arctangent for int16 samples read straight from memory (the wrapper copies them in with a memcpy).
;; Build: node scripts/build-accel.mjs (writes front-end-wasm.ts).
;;
;; front_f32: four samples per step in f32x4 (twice the lanes of f64x2, and f32 division and square root are
;; much cheaper), an 8-term polynomial for atan on [0, 1], and the octant offset k·π/2 added in f64 so that the
;; rounding of f32 near ±π does not reach the phase. It also checks the phase steps, so that a block whose
;; tracker decisions could turn on the last bits of a phase is left to the JavaScript stages.
;; front_f64: two samples per step in f64x2, in the same order of operations as the JavaScript stages
;; (correction.ts, monitor.ts, fastAtan2 in phase.ts); WebAssembly has no fused multiply-add, so its level and
;; phase are the JavaScript ones to the bit.
(module
  (memory (export "memory") 1)

  ;; front_f32(n, xPtr, yPtr, levelPtr, phasePtr, ux, u0, vx, vy, v0, below, above, minLevel, lastPhase, maxStep)
  ;;   -> 1 when every sample is quiet: codes in [below, above], level >= minLevel, and every phase step (the
  ;;   first from lastPhase) under maxStep in size; else 0. n a multiple of 4. Level out as f32, phase as f64.
  ;; Constants live in locals set before the loop: V8 would otherwise rebuild each v128.const in every pass.
  (func (export "front_f32")
    (param $n i32) (param $xp i32) (param $yp i32) (param $lp i32) (param $pp i32)
    (param $ux f32) (param $u0 f32) (param $vx f32) (param $vy f32) (param $v0 f32)
    (param $below i32) (param $above i32) (param $minLevel f32) (param $lastPhase f32) (param $maxStep f32)
    (result i32)
    (local $i i32) (local $bad v128) (local $xi v128) (local $yi v128)
    (local $x v128) (local $y v128) (local $u v128) (local $v v128) (local $lev v128)
    (local $ax v128) (local $ay v128) (local $swap v128) (local $t v128) (local $s v128) (local $s2 v128) (local $r v128)
    (local $k v128) (local $sign v128) (local $neg v128) (local $ph v128) (local $last v128) (local $d v128)
    (local $kux v128) (local $ku0 v128) (local $kvx v128) (local $kvy v128) (local $kv0 v128)
    (local $kbelow v128) (local $kabove v128) (local $kmin v128) (local $kstep v128) (local $kstepHigh v128)
    (local $a1 v128) (local $a3 v128) (local $a5 v128) (local $a7 v128) (local $a9 v128) (local $a11 v128) (local $a13 v128) (local $a15 v128)
    (local $zero v128) (local $two v128) (local $signBit v128) (local $halfPi v128) (local $halfPi64 v128)
    (local.set $kux (f32x4.splat (local.get $ux)))
    (local.set $ku0 (f32x4.splat (local.get $u0)))
    (local.set $kvx (f32x4.splat (local.get $vx)))
    (local.set $kvy (f32x4.splat (local.get $vy)))
    (local.set $kv0 (f32x4.splat (local.get $v0)))
    (local.set $kbelow (i32x4.splat (local.get $below)))
    (local.set $kabove (i32x4.splat (local.get $above)))
    (local.set $kmin (f32x4.splat (local.get $minLevel)))
    ;; A step d in [0, 2π) is one of size min(d, 2π − d): too large when it lies in [maxStep, 2π − maxStep].
    (local.set $kstep (f32x4.splat (local.get $maxStep)))
    (local.set $kstepHigh (f32x4.sub (f32x4.splat (f32.const 6.283185307179586)) (local.get $kstep)))
    (local.set $last (f32x4.splat (local.get $lastPhase)))
    ;; atan(t) ≈ t·(a1 + a3·s + ... + a15·s^7), s = t², on [0, 1]: 8 terms, least maximum error (Lawson
    ;; iteration, 3.7e-8 rad in exact arithmetic), rounded to f32.
    (local.set $a1 (f32x4.splat (f32.const -6.556510925292969e-07))) ;; a1 − 1: see below
    (local.set $a3 (f32x4.splat (f32.const -0.33329859375953674)))
    (local.set $a5 (f32x4.splat (f32.const 0.19946563243865967)))
    (local.set $a7 (f32x4.splat (f32.const -0.13908620178699493)))
    (local.set $a9 (f32x4.splat (f32.const 0.09642170369625092)))
    (local.set $a11 (f32x4.splat (f32.const -0.05591193214058876)))
    (local.set $a13 (f32x4.splat (f32.const 0.02186266891658306)))
    (local.set $a15 (f32x4.splat (f32.const -0.004054483491927385)))
    (local.set $zero (v128.const i32x4 0 0 0 0))
    (local.set $two (v128.const i32x4 2 2 2 2))
    (local.set $signBit (v128.const i32x4 0x80000000 0x80000000 0x80000000 0x80000000))
    (local.set $halfPi (f32x4.splat (f32.const 1.5707963267948966)))
    (local.set $halfPi64 (f64x2.splat (f64.const 1.5707963267948966)))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $i) (local.get $n)))
        (local.set $xi (i32x4.extend_low_i16x8_s (v128.load64_zero (i32.add (local.get $xp) (i32.shl (local.get $i) (i32.const 1))))))
        (local.set $yi (i32x4.extend_low_i16x8_s (v128.load64_zero (i32.add (local.get $yp) (i32.shl (local.get $i) (i32.const 1))))))
        (local.set $bad (v128.or (local.get $bad)
          (v128.or (v128.or (i32x4.lt_s (local.get $xi) (local.get $kbelow)) (i32x4.gt_s (local.get $xi) (local.get $kabove)))
                   (v128.or (i32x4.lt_s (local.get $yi) (local.get $kbelow)) (i32x4.gt_s (local.get $yi) (local.get $kabove))))))
        (local.set $x (f32x4.convert_i32x4_s (local.get $xi)))
        (local.set $y (f32x4.convert_i32x4_s (local.get $yi)))
        ;; u = ux*x + u0; v = (vx*x + vy*y) + v0
        (local.set $u (f32x4.add (f32x4.mul (local.get $kux) (local.get $x)) (local.get $ku0)))
        (local.set $v (f32x4.add (f32x4.add (f32x4.mul (local.get $kvx) (local.get $x)) (f32x4.mul (local.get $kvy) (local.get $y))) (local.get $kv0)))
        (local.set $lev (f32x4.sqrt (f32x4.add (f32x4.mul (local.get $u) (local.get $u)) (f32x4.mul (local.get $v) (local.get $v)))))
        (v128.store (i32.add (local.get $lp) (i32.shl (local.get $i) (i32.const 2))) (local.get $lev))
        (local.set $bad (v128.or (local.get $bad) (f32x4.lt (local.get $lev) (local.get $kmin))))
        ;; atan of t = min/max on [0, 1]. pmin/pmax are single instructions (no NaN rules to honour: a NaN only
        ;; comes from u = v = 0, whose level 0 already makes the block not quiet).
        (local.set $ax (f32x4.abs (local.get $u)))
        (local.set $ay (f32x4.abs (local.get $v)))
        (local.set $swap (f32x4.gt (local.get $ay) (local.get $ax)))
        (local.set $t (f32x4.div (f32x4.pmin (local.get $ax) (local.get $ay)) (f32x4.pmax (local.get $ax) (local.get $ay))))
        ;; Estrin's scheme: a shorter dependency chain than Horner's, so more of it runs in parallel.
        (local.set $s (f32x4.mul (local.get $t) (local.get $t)))
        (local.set $s2 (f32x4.mul (local.get $s) (local.get $s)))
        ;; Written as t + t·(P(s) − 1): the large term t is exact and the correction (at most 0.22) rounds small.
        (local.set $r (f32x4.add (local.get $t) (f32x4.mul (local.get $t) (f32x4.add
          (f32x4.add (f32x4.add (local.get $a1) (f32x4.mul (local.get $s) (local.get $a3)))
                     (f32x4.mul (local.get $s2) (f32x4.add (local.get $a5) (f32x4.mul (local.get $s) (local.get $a7)))))
          (f32x4.mul (f32x4.mul (local.get $s2) (local.get $s2))
                     (f32x4.add (f32x4.add (local.get $a9) (f32x4.mul (local.get $s) (local.get $a11)))
                                (f32x4.mul (local.get $s2) (f32x4.add (local.get $a13) (f32x4.mul (local.get $s) (local.get $a15))))))))))
        ;; phase = k·π/2 + (±r): swap gives k = 1, −r; u < 0 gives k → 2 − k, sign flipped; v < 0 negates both.
        ;; The sign flips are exact, so only the f64 sum below rounds.
        (local.set $k (i32x4.sub (local.get $zero) (local.get $swap)))
        (local.set $sign (v128.and (local.get $swap) (local.get $signBit)))
        (local.set $neg (f32x4.lt (local.get $u) (local.get $zero)))
        (local.set $k (v128.bitselect (i32x4.sub (local.get $two) (local.get $k)) (local.get $k) (local.get $neg)))
        (local.set $sign (v128.xor (local.get $sign) (v128.and (local.get $neg) (local.get $signBit))))
        (local.set $neg (f32x4.lt (local.get $v) (local.get $zero)))
        (local.set $k (i32x4.sub (v128.xor (local.get $k) (local.get $neg)) (local.get $neg))) ;; −k where neg
        (local.set $sign (v128.xor (local.get $sign) (v128.and (local.get $neg) (local.get $signBit))))
        (local.set $r (v128.xor (local.get $r) (local.get $sign)))
        ;; Step check in f32 (its rounding is far inside the caller's margin), against the previous sample.
        (local.set $ph (f32x4.add (f32x4.mul (f32x4.convert_i32x4_s (local.get $k)) (local.get $halfPi)) (local.get $r)))
        (local.set $d (f32x4.abs (f32x4.sub (local.get $ph)
          (i8x16.shuffle 12 13 14 15 16 17 18 19 20 21 22 23 24 25 26 27 (local.get $last) (local.get $ph)))))
        (local.set $bad (v128.or (local.get $bad)
          (v128.and (f32x4.ge (local.get $d) (local.get $kstep)) (f32x4.le (local.get $d) (local.get $kstepHigh)))))
        (local.set $last (local.get $ph))
        ;; The phase in f64: k·π/2 is exact there, so the sum rounds once.
        (v128.store (i32.add (local.get $pp) (i32.shl (local.get $i) (i32.const 3)))
          (f64x2.add (f64x2.mul (f64x2.convert_low_i32x4_s (local.get $k)) (local.get $halfPi64))
                     (f64x2.promote_low_f32x4 (local.get $r))))
        (v128.store offset=16 (i32.add (local.get $pp) (i32.shl (local.get $i) (i32.const 3)))
          (f64x2.add (f64x2.mul (f64x2.convert_low_i32x4_s (i8x16.shuffle 8 9 10 11 12 13 14 15 8 9 10 11 12 13 14 15 (local.get $k) (local.get $k)))
                                (local.get $halfPi64))
                     (f64x2.promote_low_f32x4 (i8x16.shuffle 8 9 10 11 12 13 14 15 8 9 10 11 12 13 14 15 (local.get $r) (local.get $r)))))
        (local.set $i (i32.add (local.get $i) (i32.const 4)))
        (br $next)))
    (i32.eqz (v128.any_true (local.get $bad))))

  ;; front_f64(n, wide, xPtr, yPtr, levelPtr, phasePtr, ux, u0, vx, vy, v0, low, high, minLevel) -> 1 when every
  ;; sample is quiet (level >= minLevel, codes strictly inside (low, high)), else 0. n even. Samples are int16, or
  ;; f64 when wide is not 0 (read as they are: a Float64Array's values). Level out as f32, phase f64.
  (func (export "front_f64")
    (param $n i32) (param $wide i32) (param $xp i32) (param $yp i32) (param $lp i32) (param $pp i32)
    (param $ux f64) (param $u0 f64) (param $vx f64) (param $vy f64) (param $v0 f64)
    (param $low f64) (param $high f64) (param $minLevel f64)
    (result i32)
    (local $i i32) (local $bad v128)
    (local $x v128) (local $y v128) (local $u v128) (local $v v128) (local $lev v128)
    (local $ax v128) (local $ay v128) (local $swap v128) (local $t v128) (local $s v128) (local $r v128)
    (local $s2 v128) (local $s4 v128) (local $q v128)
    (local $kux v128) (local $ku0 v128) (local $kvx v128) (local $kvy v128) (local $kv0 v128)
    (local $klo v128) (local $khi v128) (local $kmin v128)
    (local $b1 v128) (local $b3 v128) (local $b5 v128) (local $b7 v128) (local $b9 v128) (local $b11 v128) (local $b13 v128) (local $b15 v128) (local $b17 v128) (local $halfPi v128) (local $pi v128) (local $zero v128)
    (local.set $kux (f64x2.splat (local.get $ux)))
    (local.set $ku0 (f64x2.splat (local.get $u0)))
    (local.set $kvx (f64x2.splat (local.get $vx)))
    (local.set $kvy (f64x2.splat (local.get $vy)))
    (local.set $kv0 (f64x2.splat (local.get $v0)))
    (local.set $klo (f64x2.splat (local.get $low)))
    (local.set $khi (f64x2.splat (local.get $high)))
    (local.set $kmin (f64x2.splat (local.get $minLevel)))
    ;; fastAtan2's coefficients (phase.ts), in locals as in front_f32.
    (local.set $b1 (f64x2.splat (f64.const 0.9999998863890917)))
    (local.set $b3 (f64x2.splat (f64.const -0.3333259705438864)))
    (local.set $b5 (f64x2.splat (f64.const 0.1998590712848943)))
    (local.set $b7 (f64x2.splat (f64.const -0.1416123150897566)))
    (local.set $b9 (f64x2.splat (f64.const 0.10498954015264128)))
    (local.set $b11 (f64x2.splat (f64.const -0.07234872864896962)))
    (local.set $b13 (f64x2.splat (f64.const 0.03978139592708155)))
    (local.set $b15 (f64x2.splat (f64.const -0.014401459520919384)))
    (local.set $b17 (f64x2.splat (f64.const 0.002456749204230781)))
    (local.set $halfPi (f64x2.splat (f64.const 1.5707963267948966)))
    (local.set $pi (f64x2.splat (f64.const 3.141592653589793)))
    (local.set $zero (f64x2.splat (f64.const 0)))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $i) (local.get $n)))
        (if (local.get $wide)
          (then
            (local.set $x (v128.load (i32.add (local.get $xp) (i32.shl (local.get $i) (i32.const 3)))))
            (local.set $y (v128.load (i32.add (local.get $yp) (i32.shl (local.get $i) (i32.const 3))))))
          (else
            (local.set $x (f64x2.convert_low_i32x4_s (i32x4.extend_low_i16x8_s (v128.load32_zero (i32.add (local.get $xp) (i32.shl (local.get $i) (i32.const 1)))))))
            (local.set $y (f64x2.convert_low_i32x4_s (i32x4.extend_low_i16x8_s (v128.load32_zero (i32.add (local.get $yp) (i32.shl (local.get $i) (i32.const 1)))))))))
        ;; u = ux*x + u0; v = (vx*x + vy*y) + v0
        (local.set $u (f64x2.add (f64x2.mul (local.get $kux) (local.get $x)) (local.get $ku0)))
        (local.set $v (f64x2.add (f64x2.add (f64x2.mul (local.get $kvx) (local.get $x)) (f64x2.mul (local.get $kvy) (local.get $y))) (local.get $kv0)))
        (local.set $lev (f64x2.sqrt (f64x2.add (f64x2.mul (local.get $u) (local.get $u)) (f64x2.mul (local.get $v) (local.get $v)))))
        ;; Round to f32 as a Float32Array store does (to nearest).
        (v128.store64_lane 0 (i32.add (local.get $lp) (i32.shl (local.get $i) (i32.const 2))) (f32x4.demote_f64x2_zero (local.get $lev)))
        (local.set $bad (v128.or (local.get $bad)
          (v128.or
            (v128.or (v128.not (f64x2.ge (local.get $lev) (local.get $kmin)))
                     (v128.or (f64x2.le (local.get $x) (local.get $klo)) (f64x2.ge (local.get $x) (local.get $khi))))
            (v128.or (f64x2.le (local.get $y) (local.get $klo)) (f64x2.ge (local.get $y) (local.get $khi))))))
        ;; fastAtan2(v, u)
        (local.set $ax (f64x2.abs (local.get $u)))
        (local.set $ay (f64x2.abs (local.get $v)))
        (local.set $swap (f64x2.gt (local.get $ay) (local.get $ax)))
        ;; pmin/pmax pick what fastAtan2's swap picks (ties are equal values); fastAtan2's guard for 0/0 is left
        ;; out, as u = v = 0 has level 0 and so never is in a quiet block.
        (local.set $t (f64x2.div (f64x2.pmin (local.get $ax) (local.get $ay)) (f64x2.pmax (local.get $ax) (local.get $ay))))
        (local.set $s (f64x2.mul (local.get $t) (local.get $t)))
        ;; Estrin's scheme in fastAtan2's order, operation for operation:
        ;; t·(((b1 + s·b3) + s²·(b5 + s·b7)) + s⁴·(((b9 + s·b11) + s²·(b13 + s·b15)) + s⁴·b17))
        (local.set $s2 (f64x2.mul (local.get $s) (local.get $s)))
        (local.set $s4 (f64x2.mul (local.get $s2) (local.get $s2)))
        (local.set $r (f64x2.add (local.get $b1) (f64x2.mul (local.get $s) (local.get $b3))))
        (local.set $r (f64x2.add (local.get $r) (f64x2.mul (local.get $s2) (f64x2.add (local.get $b5) (f64x2.mul (local.get $s) (local.get $b7))))))
        (local.set $q (f64x2.add (local.get $b9) (f64x2.mul (local.get $s) (local.get $b11))))
        (local.set $q (f64x2.add (local.get $q) (f64x2.mul (local.get $s2) (f64x2.add (local.get $b13) (f64x2.mul (local.get $s) (local.get $b15))))))
        (local.set $q (f64x2.add (local.get $q) (f64x2.mul (local.get $s4) (local.get $b17))))
        (local.set $r (f64x2.add (local.get $r) (f64x2.mul (local.get $s4) (local.get $q))))
        (local.set $r (f64x2.mul (local.get $t) (local.get $r)))
        (local.set $r (v128.bitselect (f64x2.sub (local.get $halfPi) (local.get $r)) (local.get $r) (local.get $swap)))
        (local.set $r (v128.bitselect (f64x2.sub (local.get $pi) (local.get $r)) (local.get $r) (f64x2.lt (local.get $u) (local.get $zero))))
        (local.set $r (v128.bitselect (f64x2.neg (local.get $r)) (local.get $r) (f64x2.lt (local.get $v) (local.get $zero))))
        (v128.store (i32.add (local.get $pp) (i32.shl (local.get $i) (i32.const 3))) (local.get $r))
        (local.set $i (i32.add (local.get $i) (i32.const 2)))
        (br $next)))
    (i32.eqz (v128.any_true (local.get $bad))))
)
