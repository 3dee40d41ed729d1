;; Whole CSV rows of plain numbers, parsed in WebAssembly: the CSV capture reader's common case. A row is taken when
;; every field is [+-]digits[.digits][(e|E)[+-]digits] with at most 18 digits, a mantissa under 2^53 and a power
;; of ten within ±22 (Clinger's exact case: one correctly rounded multiplication or division, the JavaScript
;; parser's arithmetic, so the same doubles), fields end at a comma and the row at LF or CR LF, and its content is
;; at most `maxLine` bytes. Any other row (a comment, a blank or bad row, spaces, NaN, a long mantissa, the chunk's
;; last partial line) is left to the reader's JavaScript row parser, so errors and rare numbers stay its own.
;; Digits are read 8 at a time (SWAR: their count from the first byte that is not a digit, their value by three
;; multiplications), and the common cases run without data-dependent branches: this machine's cost is the number
;; of instructions per row. Build: node scripts/build-accel.mjs (writes csv-rows-wasm.ts).
;;
;; Memory: 10^0..10^22 as f64 at 0, 10^0..10^8 as i64 at 184 and a byte class table at 256 (written by `configure`),
;; then the reader's byte buffer, the output arrays, where each column's value goes and the copies for columns that
;; feed two outputs, where the caller placed them (csv-rows.ts).
(module
  (memory (export "memory") 1)
  ;; Index after the newline of the last row taken by `rows`.
  (global $position (export "position") (mut i32) (i32.const 0))
  (global $columns (mut i32) (i32.const 0))
  (global $maxLine (mut i32) (i32.const 0))
  ;; Per column, two i32: the byte offset of the array its values go to (a sink for columns not read), and the byte
  ;; that ends it (a comma, LF after the last).
  (global $destinations (mut i32) (i32.const 0))
  ;; Pairs (to, from) of array offsets: an output whose column already feeds another, copied once its row is read.
  (global $copies (mut i32) (i32.const 0))
  (global $copyCount (mut i32) (i32.const 0))

  (func (export "configure") (param $columns i32) (param $maxLine i32) (param $destinations i32) (param $copies i32) (param $copyCount i32)
    (local $k i32) (local $power f64) (local $integerPower i64)
    (global.set $columns (local.get $columns))
    (global.set $maxLine (local.get $maxLine))
    (global.set $destinations (local.get $destinations))
    (global.set $copies (local.get $copies))
    (global.set $copyCount (local.get $copyCount))
    ;; 10^k by repeated multiplication is exact up to k = 22 (5^22 < 2^53), the same doubles as 10 ** k.
    (local.set $power (f64.const 1))
    (block $done
      (loop $next
        (br_if $done (i32.gt_s (local.get $k) (i32.const 22)))
        (f64.store (i32.shl (local.get $k) (i32.const 3)) (local.get $power))
        (local.set $power (f64.mul (local.get $power) (f64.const 10)))
        (local.set $k (i32.add (local.get $k) (i32.const 1)))
        (br $next)))
    ;; 10^0..10^8 as i64, to join a fraction's digits to the integer's.
    (local.set $k (i32.const 0))
    (local.set $integerPower (i64.const 1))
    (block $done
      (loop $next
        (br_if $done (i32.gt_s (local.get $k) (i32.const 8)))
        (i64.store offset=184 (i32.shl (local.get $k) (i32.const 3)) (local.get $integerPower))
        (local.set $integerPower (i64.mul (local.get $integerPower) (i64.const 10)))
        (local.set $k (i32.add (local.get $k) (i32.const 1)))
        (br $next)))
    ;; The bytes that end a field's digits other than a separator: a digit beyond the 8 read at once, a point, e, E.
    (local.set $k (i32.const 0x30))
    (block $done
      (loop $next
        (br_if $done (i32.gt_s (local.get $k) (i32.const 0x39)))
        (i32.store8 offset=256 (local.get $k) (i32.const 1))
        (local.set $k (i32.add (local.get $k) (i32.const 1)))
        (br $next)))
    (i32.store8 offset=256 (i32.const 0x2e) (i32.const 1))
    (i32.store8 offset=256 (i32.const 0x45) (i32.const 1))
    (i32.store8 offset=256 (i32.const 0x65) (i32.const 1)))

  ;; rows(start, limit, slot, capacity): parses whole rows from byte `start` (up to the last LF before `limit`) into
  ;; slots slot, slot + 1 … below `capacity`; returns how many and leaves the index after them in `position`.
  (func (export "rows") (param $start i32) (param $limit i32) (param $slot i32) (param $capacity i32) (result i32)
    (local $end i32) (local $at i32) (local $first i32) (local $i i32) (local $c i32) (local $d i32)
    (local $cell i32) (local $negative i32) (local $digitsStart i32)
    (local $digits i32) (local $pointAt i32) (local $exponent i32) (local $exponentNegative i32)
    (local $exponentStart i32) (local $written i32) (local $n i32) (local $offset i32)
    (local $copy i32) (local $cellEnd i32) (local $v i64) (local $mantissa i64) (local $value f64)
    ;; Only whole rows: up to the last LF. Every row looked at then ends inside the bytes, and the scans, which stop
    ;; at any byte that is not a digit, never pass its LF. The 8-byte reads may look past it: at the row's own
    ;; bytes, or at the arrays after the buffer.
    (local.set $end (local.get $limit))
    (block $found
      (loop $back
        (br_if $found (i32.le_u (local.get $end) (local.get $start)))
        (br_if $found (i32.eq (i32.load8_u (i32.sub (local.get $end) (i32.const 1))) (i32.const 0x0a)))
        (local.set $end (i32.sub (local.get $end) (i32.const 1)))
        (br $back)))
    (local.set $cellEnd (i32.add (global.get $destinations) (i32.shl (global.get $columns) (i32.const 3))))
    (local.set $at (local.get $start))
    (local.set $first (local.get $slot))
    (block $stop
      (loop $row
        (br_if $stop (i32.ge_u (local.get $at) (local.get $end)))
        (br_if $stop (i32.ge_u (local.get $slot) (local.get $capacity)))
        (local.set $i (local.get $at))
        (local.set $offset (i32.shl (local.get $slot) (i32.const 3)))
        (local.set $cell (global.get $destinations))
        (loop $nextField
          ;; The field's first 8 bytes, and its sign without a branch (signs that change from row to row would be
          ;; mispredicted) and without a second read: each read here waits for the field before, so they count twice.
          (local.set $v (i64.load (local.get $i)))
          (local.set $c (i32.wrap_i64 (i64.and (local.get $v) (i64.const 0xff))))
          (local.set $negative (i32.eq (local.get $c) (i32.const 0x2d)))
          (local.set $d (i32.or (local.get $negative) (i32.eq (local.get $c) (i32.const 0x2b))))
          (local.set $i (i32.add (local.get $i) (local.get $d)))
          (local.set $digitsStart (local.get $i))
          ;; The digits from there (7 after a sign: the byte shifted in is not a digit), their count up to the first
          ;; byte that is not a digit.
          (local.set $v
            (i64.xor
              (i64.shr_u (local.get $v) (i64.extend_i32_u (i32.shl (local.get $d) (i32.const 3))))
              (i64.const 0x3030303030303030)))
          (local.set $n
            (i32.wrap_i64 (i64.shr_u
              (i64.ctz (i64.and (i64.or (i64.add (local.get $v) (i64.const 0x7676767676767676)) (local.get $v)) (i64.const 0x8080808080808080)))
              (i64.const 3))))
          (local.set $i (i32.add (local.get $i) (local.get $n)))
          (local.set $c (i32.load8_u (local.get $i)))
          (if (i32.load8_u offset=256 (local.get $c))
            (then
              ;; More than 8 digits, a point or an exponent.
              (local.set $mantissa
                (select (i64.const 0)
                  (i64.shr_u
                    (i64.mul
                      (i64.and
                        (i64.shr_u
                          (i64.mul
                            (i64.and
                              (i64.shr_u
                                (i64.mul
                                  (i64.shl (local.get $v) (i64.extend_i32_u (i32.shl (i32.sub (i32.const 8) (local.get $n)) (i32.const 3))))
                                  (i64.const 2561))
                                (i64.const 8))
                              (i64.const 0x00ff00ff00ff00ff))
                            (i64.const 6553601))
                          (i64.const 16))
                        (i64.const 0x0000ffff0000ffff))
                      (i64.const 42949672960001))
                    (i64.const 32))
                  (i32.eqz (local.get $n))))
              (block $integerDone
                (loop $integer
                  (local.set $d (i32.sub (i32.load8_u (local.get $i)) (i32.const 0x30)))
                  (br_if $integerDone (i32.gt_u (local.get $d) (i32.const 9)))
                  (local.set $mantissa (i64.add (i64.mul (local.get $mantissa) (i64.const 10)) (i64.extend_i32_u (local.get $d))))
                  (local.set $i (i32.add (local.get $i) (i32.const 1)))
                  (br $integer)))
              (local.set $exponent (i32.const 0))
              (if (i32.eq (i32.load8_u (local.get $i)) (i32.const 0x2e))
                (then
                  (local.set $pointAt (local.get $i))
                  (local.set $i (i32.add (local.get $i) (i32.const 1)))
                  (local.set $v (i64.xor (i64.load (local.get $i)) (i64.const 0x3030303030303030)))
                  (local.set $n
                    (i32.wrap_i64 (i64.shr_u
                      (i64.ctz (i64.and (i64.or (i64.add (local.get $v) (i64.const 0x7676767676767676)) (local.get $v)) (i64.const 0x8080808080808080)))
                      (i64.const 3))))
                  (local.set $mantissa
                    (i64.add
                      (i64.mul (local.get $mantissa) (i64.load offset=184 (i32.shl (local.get $n) (i32.const 3))))
                      (select (i64.const 0)
                        (i64.shr_u
                          (i64.mul
                            (i64.and
                              (i64.shr_u
                                (i64.mul
                                  (i64.and
                                    (i64.shr_u
                                      (i64.mul
                                        (i64.shl (local.get $v) (i64.extend_i32_u (i32.shl (i32.sub (i32.const 8) (local.get $n)) (i32.const 3))))
                                        (i64.const 2561))
                                      (i64.const 8))
                                    (i64.const 0x00ff00ff00ff00ff))
                                  (i64.const 6553601))
                                (i64.const 16))
                              (i64.const 0x0000ffff0000ffff))
                            (i64.const 42949672960001))
                          (i64.const 32))
                        (i32.eqz (local.get $n)))))
                  (local.set $i (i32.add (local.get $i) (local.get $n)))
                  (if (i32.eq (local.get $n) (i32.const 8))
                    (then
                      (block $fractionDone
                        (loop $fraction
                          (local.set $d (i32.sub (i32.load8_u (local.get $i)) (i32.const 0x30)))
                          (br_if $fractionDone (i32.gt_u (local.get $d) (i32.const 9)))
                          (local.set $mantissa (i64.add (i64.mul (local.get $mantissa) (i64.const 10)) (i64.extend_i32_u (local.get $d))))
                          (local.set $i (i32.add (local.get $i) (i32.const 1)))
                          (br $fraction)))))
                  (local.set $exponent (i32.sub (i32.add (local.get $pointAt) (i32.const 1)) (local.get $i)))
                  ;; A point without digits.
                  (br_if $stop (i32.eq (local.get $i) (i32.add (local.get $digitsStart) (i32.const 1))))
                  (local.set $digits (i32.sub (i32.sub (local.get $i) (local.get $digitsStart)) (i32.const 1))))
                (else
                  (br_if $stop (i32.eq (local.get $i) (local.get $digitsStart)))
                  (local.set $digits (i32.sub (local.get $i) (local.get $digitsStart)))))
              (local.set $c (i32.load8_u (local.get $i)))
              (if (i32.eq (i32.or (local.get $c) (i32.const 0x20)) (i32.const 0x65))
                (then
                  (local.set $i (i32.add (local.get $i) (i32.const 1)))
                  (local.set $c (i32.load8_u (local.get $i)))
                  (local.set $exponentNegative (i32.eq (local.get $c) (i32.const 0x2d)))
                  (local.set $i
                    (i32.add (local.get $i) (i32.or (local.get $exponentNegative) (i32.eq (local.get $c) (i32.const 0x2b)))))
                  (local.set $exponentStart (local.get $i))
                  (local.set $written (i32.const 0))
                  (block $exponentDone
                    (loop $exponentDigit
                      (local.set $d (i32.sub (i32.load8_u (local.get $i)) (i32.const 0x30)))
                      (br_if $exponentDone (i32.gt_u (local.get $d) (i32.const 9)))
                      (if (i32.lt_s (local.get $written) (i32.const 1000000))
                        (then (local.set $written (i32.add (i32.mul (local.get $written) (i32.const 10)) (local.get $d)))))
                      (local.set $i (i32.add (local.get $i) (i32.const 1)))
                      (br $exponentDigit)))
                  (br_if $stop (i32.eq (local.get $i) (local.get $exponentStart)))
                  (local.set $exponent
                    (i32.add (local.get $exponent)
                      (select (i32.sub (i32.const 0) (local.get $written)) (local.get $written) (local.get $exponentNegative))))
                  (local.set $c (i32.load8_u (local.get $i)))))
              ;; Up to 18 digits the i64 mantissa is exact; longer ones go to the JavaScript parser.
              (br_if $stop (i32.gt_u (local.get $digits) (i32.const 18)))
              (br_if $stop (i64.ge_u (local.get $mantissa) (i64.const 9007199254740992)))
              (br_if $stop (i32.gt_u (i32.add (local.get $exponent) (i32.const 22)) (i32.const 44)))
              (local.set $value
                (if (result f64) (i32.ge_s (local.get $exponent) (i32.const 0))
                  (then
                    (f64.mul (f64.convert_i64_s (local.get $mantissa)) (f64.load (i32.shl (local.get $exponent) (i32.const 3)))))
                  (else
                    (f64.div
                      (f64.convert_i64_s (local.get $mantissa))
                      (f64.load (i32.shl (i32.sub (i32.const 0) (local.get $exponent)) (i32.const 3))))))))
            (else
              ;; Up to 8 digits: exact as they are.
              (br_if $stop (i32.eqz (local.get $n)))
              (local.set $value (f64.convert_i64_s
                (i64.shr_u
                  (i64.mul
                    (i64.and
                      (i64.shr_u
                        (i64.mul
                          (i64.and
                            (i64.shr_u
                              (i64.mul
                                (i64.shl (local.get $v) (i64.extend_i32_u (i32.shl (i32.sub (i32.const 8) (local.get $n)) (i32.const 3))))
                                (i64.const 2561))
                              (i64.const 8))
                            (i64.const 0x00ff00ff00ff00ff))
                          (i64.const 6553601))
                        (i64.const 16))
                      (i64.const 0x0000ffff0000ffff))
                    (i64.const 42949672960001))
                  (i64.const 32))))))
          ;; -x for a minus sign, without a branch: its sign bit flipped (-0 for "-0", as the JavaScript parser gives).
          (local.set $value
            (f64.reinterpret_i64
              (i64.xor (i64.reinterpret_f64 (local.get $value)) (i64.shl (i64.extend_i32_u (local.get $negative)) (i64.const 63)))))
          ;; The field's end: a comma between fields, LF or CR LF after the last.
          (if (i32.ne (local.get $c) (i32.load offset=4 (local.get $cell)))
            (then
              (br_if $stop
                (i32.or
                  (i32.or (i32.ne (local.get $c) (i32.const 0x0d)) (i32.ne (i32.load offset=4 (local.get $cell)) (i32.const 0x0a)))
                  (i32.ne (i32.load8_u offset=1 (local.get $i)) (i32.const 0x0a))))
              (local.set $i (i32.add (local.get $i) (i32.const 1)))))
          (f64.store (i32.add (i32.load (local.get $cell)) (local.get $offset)) (local.get $value))
          (local.set $cell (i32.add (local.get $cell) (i32.const 8)))
          (local.set $i (i32.add (local.get $i) (i32.const 1)))
          (br_if $nextField (i32.lt_u (local.get $cell) (local.get $cellEnd))))
        ;; The line's content (without its LF or CR LF) within the limit the JavaScript row parser applies.
        (if (i32.gt_s (i32.sub (local.get $i) (local.get $at)) (global.get $maxLine))
          (then
            (br_if $stop
              (i32.gt_s
                (i32.sub (i32.sub (local.get $i) (local.get $at))
                  (select (i32.const 2) (i32.const 1) (i32.eq (i32.load8_u (i32.sub (local.get $i) (i32.const 2))) (i32.const 0x0d))))
                (global.get $maxLine)))))
        ;; Outputs that share a column with another (rare).
        (local.set $copy (i32.const 0))
        (block $copied
          (loop $nextCopy
            (br_if $copied (i32.ge_u (local.get $copy) (global.get $copyCount)))
            (local.set $d (i32.add (global.get $copies) (i32.shl (local.get $copy) (i32.const 3))))
            (f64.store (i32.add (i32.load (local.get $d)) (local.get $offset))
              (f64.load (i32.add (i32.load offset=4 (local.get $d)) (local.get $offset))))
            (local.set $copy (i32.add (local.get $copy) (i32.const 1)))
            (br $nextCopy)))
        (local.set $at (local.get $i))
        (local.set $slot (i32.add (local.get $slot) (i32.const 1)))
        (br $row)))
    (global.set $position (local.get $at))
    (i32.sub (local.get $slot) (local.get $first))))
