;; CRC-32C (Castagnoli; poly 0x1EDC6F41 reflected 0x82F63B78, init and xorout 0xFFFFFFFF) of bytes in this module's
;; memory, for the wire decoder (src/io/wire/decoder.ts): slicing-by-16, sixteen table loads per 16 bytes of which
;; only four wait for the running CRC, about three times the speed of the JavaScript word loop. Each byte is taken
;; out of its word already times 4 (a shift and a mask with 1020), one instruction less per byte.
;; Memory: the 16 tables (16 KiB) from 0, then the caller's bytes. Build: node scripts/build-accel.mjs (writes wire-crc-wasm.ts).
(module
  (memory (export "memory") 1)

  ;; init(): the tables. Table k at 1024·k gives the CRC of a byte followed by k zero bytes.
  (func (export "init")
    (local $byte i32) (local $crc i32) (local $bit i32) (local $at i32)
    (loop $bytes
      (local.set $crc (local.get $byte))
      (local.set $bit (i32.const 0))
      (loop $bits
        (local.set $crc
          (i32.xor (i32.shr_u (local.get $crc) (i32.const 1))
                   (i32.and (i32.const 0x82f63b78) (i32.sub (i32.const 0) (i32.and (local.get $crc) (i32.const 1))))))
        (local.set $bit (i32.add (local.get $bit) (i32.const 1)))
        (br_if $bits (i32.lt_u (local.get $bit) (i32.const 8))))
      (i32.store (i32.shl (local.get $byte) (i32.const 2)) (local.get $crc))
      (local.set $byte (i32.add (local.get $byte) (i32.const 1)))
      (br_if $bytes (i32.lt_u (local.get $byte) (i32.const 256))))
    ;; Entry i of table k (k ≥ 1) from entry i of table k − 1: one more zero byte.
    (local.set $at (i32.const 1024))
    (loop $more
      (local.set $crc (i32.load offset=0 (i32.sub (local.get $at) (i32.const 1024))))
      (i32.store (local.get $at)
        (i32.xor (i32.load (i32.shl (i32.and (local.get $crc) (i32.const 255)) (i32.const 2)))
                 (i32.shr_u (local.get $crc) (i32.const 8))))
      (local.set $at (i32.add (local.get $at) (i32.const 4)))
      (br_if $more (i32.lt_u (local.get $at) (i32.const 16384)))))

  ;; crc(p, end): CRC-32C of the bytes [p, end), as an i32 (the caller reads it unsigned).
  (func (export "crc") (param $p i32) (param $end i32) (result i32)
    (local $crc i32) (local $a i32) (local $b i32) (local $c i32) (local $d i32)
    (local.set $crc (i32.const -1))
    (block $done
      (loop $sixteen
        (br_if $done (i32.gt_u (i32.add (local.get $p) (i32.const 16)) (local.get $end)))
        (local.set $b (i32.load offset=4 (local.get $p)))
        (local.set $c (i32.load offset=8 (local.get $p)))
        (local.set $d (i32.load offset=12 (local.get $p)))
        (local.set $a (i32.xor (local.get $crc) (i32.load (local.get $p))))
        ;; One chain of xors, the twelve entries that do not depend on the running CRC first: fewer values live at once
        ;; than in a tree (V8 kept one in memory instead of seven), about a tenth faster.
        (local.set $crc
          (i32.xor (i32.xor (i32.xor (i32.xor (i32.xor (i32.xor (i32.xor (i32.xor (i32.xor (i32.xor (i32.xor (i32.xor (i32.xor (i32.xor (i32.xor (i32.load offset=11264 (i32.and (i32.shl (local.get $b) (i32.const 2)) (i32.const 1020)))
          (i32.load offset=10240 (i32.and (i32.shr_u (local.get $b) (i32.const 6)) (i32.const 1020))))
          (i32.load offset=9216 (i32.and (i32.shr_u (local.get $b) (i32.const 14)) (i32.const 1020))))
          (i32.load offset=8192 (i32.and (i32.shr_u (local.get $b) (i32.const 22)) (i32.const 1020))))
          (i32.load offset=7168 (i32.and (i32.shl (local.get $c) (i32.const 2)) (i32.const 1020))))
          (i32.load offset=6144 (i32.and (i32.shr_u (local.get $c) (i32.const 6)) (i32.const 1020))))
          (i32.load offset=5120 (i32.and (i32.shr_u (local.get $c) (i32.const 14)) (i32.const 1020))))
          (i32.load offset=4096 (i32.and (i32.shr_u (local.get $c) (i32.const 22)) (i32.const 1020))))
          (i32.load offset=3072 (i32.and (i32.shl (local.get $d) (i32.const 2)) (i32.const 1020))))
          (i32.load offset=2048 (i32.and (i32.shr_u (local.get $d) (i32.const 6)) (i32.const 1020))))
          (i32.load offset=1024 (i32.and (i32.shr_u (local.get $d) (i32.const 14)) (i32.const 1020))))
          (i32.load offset=0 (i32.and (i32.shr_u (local.get $d) (i32.const 22)) (i32.const 1020))))
          (i32.load offset=15360 (i32.and (i32.shl (local.get $a) (i32.const 2)) (i32.const 1020))))
          (i32.load offset=14336 (i32.and (i32.shr_u (local.get $a) (i32.const 6)) (i32.const 1020))))
          (i32.load offset=13312 (i32.and (i32.shr_u (local.get $a) (i32.const 14)) (i32.const 1020))))
          (i32.load offset=12288 (i32.and (i32.shr_u (local.get $a) (i32.const 22)) (i32.const 1020)))))
        (local.set $p (i32.add (local.get $p) (i32.const 16)))
        (br $sixteen)))
    (block $tail
      (loop $byte
        (br_if $tail (i32.ge_u (local.get $p) (local.get $end)))
        (local.set $crc
          (i32.xor (i32.load (i32.shl (i32.and (i32.xor (local.get $crc) (i32.load8_u (local.get $p))) (i32.const 255)) (i32.const 2)))
                   (i32.shr_u (local.get $crc) (i32.const 8))))
        (local.set $p (i32.add (local.get $p) (i32.const 1)))
        (br $byte)))
    (i32.xor (local.get $crc) (i32.const -1))))
