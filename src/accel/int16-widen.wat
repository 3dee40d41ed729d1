;; The WAV reader's decoding of two adjacent int16 channels (x, then y two bytes after it) of interleaved frames
;; into f64 blocks (or int16 blocks, `split`), in WebAssembly SIMD: one pass from the bytes as read to the blocks, in place of a split into
;; int16 arrays and two widening copies. int16 to f64 is exact, so the values are those of any other conversion.
;; Build: node scripts/build-accel.mjs (writes int16-widen-wasm.ts). The caller lays out the memory (grown to fit).
(module
  (memory (export "memory") 1)

  ;; widen(src, stride, n, xp, yp): n frames of `stride` bytes from src (the byte of the first frame's x) into the
  ;; f64 arrays at xp and yp; two-channel frames (stride 4) eight at a time, the others and the rest one at a time.
  (func (export "widen") (param $src i32) (param $stride i32) (param $n i32) (param $xp i32) (param $yp i32)
    (local $end i32) (local $a v128) (local $b v128) (local $w v128)
    (local.set $end (i32.add (local.get $xp) (i32.shl (local.get $n) (i32.const 3))))
    (if (i32.eq (local.get $stride) (i32.const 4))
      (then
        (block $done
          (loop $next
            (br_if $done (i32.gt_u (i32.add (local.get $xp) (i32.const 64)) (local.get $end)))
            ;; Eight frames as i32 lanes (y << 16 | x): x sign-extended by a shift up and back, y by the shift down;
            ;; then f64 two at a time, the upper two lanes moved down first.
            (local.set $a (v128.load (local.get $src)))
            (local.set $b (v128.load offset=16 (local.get $src)))
            (local.set $w (i32x4.shr_s (i32x4.shl (local.get $a) (i32.const 16)) (i32.const 16)))
            (v128.store (local.get $xp) (f64x2.convert_low_i32x4_s (local.get $w)))
            (v128.store offset=16 (local.get $xp) (f64x2.convert_low_i32x4_s (i8x16.shuffle 8 9 10 11 12 13 14 15 8 9 10 11 12 13 14 15 (local.get $w) (local.get $w))))
            (local.set $w (i32x4.shr_s (i32x4.shl (local.get $b) (i32.const 16)) (i32.const 16)))
            (v128.store offset=32 (local.get $xp) (f64x2.convert_low_i32x4_s (local.get $w)))
            (v128.store offset=48 (local.get $xp) (f64x2.convert_low_i32x4_s (i8x16.shuffle 8 9 10 11 12 13 14 15 8 9 10 11 12 13 14 15 (local.get $w) (local.get $w))))
            (local.set $w (i32x4.shr_s (local.get $a) (i32.const 16)))
            (v128.store (local.get $yp) (f64x2.convert_low_i32x4_s (local.get $w)))
            (v128.store offset=16 (local.get $yp) (f64x2.convert_low_i32x4_s (i8x16.shuffle 8 9 10 11 12 13 14 15 8 9 10 11 12 13 14 15 (local.get $w) (local.get $w))))
            (local.set $w (i32x4.shr_s (local.get $b) (i32.const 16)))
            (v128.store offset=32 (local.get $yp) (f64x2.convert_low_i32x4_s (local.get $w)))
            (v128.store offset=48 (local.get $yp) (f64x2.convert_low_i32x4_s (i8x16.shuffle 8 9 10 11 12 13 14 15 8 9 10 11 12 13 14 15 (local.get $w) (local.get $w))))
            (local.set $src (i32.add (local.get $src) (i32.const 32)))
            (local.set $xp (i32.add (local.get $xp) (i32.const 64)))
            (local.set $yp (i32.add (local.get $yp) (i32.const 64)))
            (br $next)))))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $xp) (local.get $end)))
        (f64.store (local.get $xp) (f64.convert_i32_s (i32.load16_s (local.get $src))))
        (f64.store (local.get $yp) (f64.convert_i32_s (i32.load16_s offset=2 (local.get $src))))
        (local.set $src (i32.add (local.get $src) (local.get $stride)))
        (local.set $xp (i32.add (local.get $xp) (i32.const 8)))
        (local.set $yp (i32.add (local.get $yp) (i32.const 8)))
        (br $next))))
;; split(src, stride, n, xp, yp): the same frames into the int16 arrays at xp and yp, as stored (blocks of
  ;; int16 samples for a chain that takes them so); two-channel frames eight at a time, the rest one at a time.
  (func (export "split") (param $src i32) (param $stride i32) (param $n i32) (param $xp i32) (param $yp i32)
    (local $end i32) (local $a v128) (local $b v128)
    (local.set $end (i32.add (local.get $xp) (i32.shl (local.get $n) (i32.const 1))))
    (if (i32.eq (local.get $stride) (i32.const 4))
      (then
        (block $done
          (loop $next
            (br_if $done (i32.gt_u (i32.add (local.get $xp) (i32.const 16)) (local.get $end)))
            ;; Eight frames [x y] of two bytes each: the x bytes of both vectors, then the y bytes.
            (local.set $a (v128.load (local.get $src)))
            (local.set $b (v128.load offset=16 (local.get $src)))
            (v128.store (local.get $xp) (i8x16.shuffle 0 1 4 5 8 9 12 13 16 17 20 21 24 25 28 29 (local.get $a) (local.get $b)))
            (v128.store (local.get $yp) (i8x16.shuffle 2 3 6 7 10 11 14 15 18 19 22 23 26 27 30 31 (local.get $a) (local.get $b)))
            (local.set $src (i32.add (local.get $src) (i32.const 32)))
            (local.set $xp (i32.add (local.get $xp) (i32.const 16)))
            (local.set $yp (i32.add (local.get $yp) (i32.const 16)))
            (br $next)))))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $xp) (local.get $end)))
        (i32.store16 (local.get $xp) (i32.load16_u (local.get $src)))
        (i32.store16 (local.get $yp) (i32.load16_u offset=2 (local.get $src)))
        (local.set $src (i32.add (local.get $src) (local.get $stride)))
        (local.set $xp (i32.add (local.get $xp) (i32.const 2)))
        (local.set $yp (i32.add (local.get $yp) (i32.const 2)))
        (br $next))))
)
