;; The pair loop of the hindsight's graph build (src/hindsight/graph.ts,
;; buildCompactGraph), run in WebAssembly: one demand's row from the supply buckets of
;; the grid cells around it. It does what the JavaScript loop does, operation for
;; operation in the same order, so the same pairs come out with the same codes.
;;
;; Memory (all in the store's shared memory, past the pairs): the supplies' terms
;; ($terms: 8 f64 a supply, graph.ts STRIDE: the distance terms, end, arrival, one
;; capability word), the cells ($cells: start and length in $pool of each cell's
;; bucket, i32 pairs), the cells around the demand ($nbr, $nNbr cell numbers), and
;; the row's output: columns ($outCols, i32) and codes ($outCodes, u8). A pair whose
;; fast travel lies within EDGE of the limit is written with code 255 and its place
;; noted in $defer: the caller decides it by the exact formula.
;;
;; Returns the row's length; the count of deferred pairs goes to $out (an i32).
;;
;; $place then writes a finished row into the store: its columns less the row's lowest
;; as u16 (zeros for a row spanning more than $span columns, kept apart by the caller)
;; and its codes; the lowest and highest columns go to $out + 8 and $out + 12.
(module
  (import "env" "memory" (memory 1 65536 shared))
  (func (export "row")
    (param $terms i32) (param $cells i32) (param $pool i32) (param $nbr i32) (param $nNbr i32)
    (param $outCols i32) (param $outCodes i32) (param $defer i32) (param $out i32)
    (param $euclid i32) (param $capMode i32) (param $needs i32)
    (param $u0 f64) (param $u1 f64) (param $u2 f64) (param $u3 f64) (param $u4 f64)
    (param $t f64) (param $gone f64) (param $cut f64) (param $twoR f64) (param $sixth f64)
    (param $minPerKm f64) (param $waitPerMs f64) (param $edgeBelow f64) (param $maxTravel f64) (param $edge f64)
    (param $P f64) (param $perStep f64) (param $top i32)
    (result i32)
    (local $q i32) (local $cell i32) (local $start i32) (local $n i32) (local $b i32) (local $keep i32)
    (local $j i32) (local $o i32) (local $sEnd f64) (local $x f64) (local $y f64) (local $h f64) (local $km f64)
    (local $travel f64) (local $wait f64) (local $c f64) (local $code i32) (local $len i32) (local $nDefer i32)
    (local.set $q (i32.const 0))
    (block $cellsDone
      (loop $nextCell
        (br_if $cellsDone (i32.ge_u (local.get $q) (local.get $nNbr)))
        (local.set $cell (i32.add (local.get $cells)
          (i32.shl (i32.load (i32.add (local.get $nbr) (i32.shl (local.get $q) (i32.const 2)))) (i32.const 3))))
        (local.set $start (i32.add (local.get $pool) (i32.shl (i32.load (local.get $cell)) (i32.const 2))))
        (local.set $n (i32.load offset=4 (local.get $cell)))
        (local.set $keep (i32.const 0))
        (local.set $b (i32.const 0))
        (block $bucketDone
          (loop $nextPair
            (br_if $bucketDone (i32.ge_u (local.get $b) (local.get $n)))
            (local.set $j (i32.load (i32.add (local.get $start) (i32.shl (local.get $b) (i32.const 2)))))
            (local.set $b (i32.add (local.get $b) (i32.const 1)))
            (local.set $o (i32.add (local.get $terms) (i32.shl (local.get $j) (i32.const 6))))
            (local.set $sEnd (f64.load offset=40 (local.get $o)))
            ;; Ended before any row still to come: out of the bucket.
            (br_if $nextPair (f64.lt (local.get $sEnd) (local.get $gone)))
            (i32.store (i32.add (local.get $start) (i32.shl (local.get $keep) (i32.const 2))) (local.get $j))
            (local.set $keep (i32.add (local.get $keep) (i32.const 1)))
            ;; Present together: it must not leave before t.
            (br_if $nextPair (f64.lt (local.get $sEnd) (local.get $t)))
            (if (local.get $euclid)
              (then
                (local.set $x (f64.sub (f64.load (local.get $o)) (local.get $u0)))
                (local.set $y (f64.sub (f64.load offset=8 (local.get $o)) (local.get $u1)))
                (local.set $h (f64.add (f64.mul (local.get $x) (local.get $x)) (f64.mul (local.get $y) (local.get $y))))
                (br_if $nextPair (i32.eqz (f64.le (local.get $h) (local.get $cut))))
                (local.set $km (f64.sqrt (local.get $h))))
              (else
                (local.set $x (f64.sub (f64.mul (f64.load (local.get $o)) (local.get $u1)) (f64.mul (f64.load offset=8 (local.get $o)) (local.get $u0))))
                (local.set $y (f64.sub (f64.mul (f64.load offset=16 (local.get $o)) (local.get $u3)) (f64.mul (f64.load offset=24 (local.get $o)) (local.get $u2))))
                (local.set $h (f64.add (f64.mul (local.get $x) (local.get $x))
                  (f64.mul (f64.mul (f64.mul (f64.load offset=32 (local.get $o)) (local.get $u4)) (local.get $y)) (local.get $y))))
                (br_if $nextPair (i32.eqz (f64.le (local.get $h) (local.get $cut))))
                (local.set $km (f64.mul (f64.mul (local.get $twoR) (f64.sqrt (local.get $h)))
                  (f64.add (f64.add (f64.const 1) (f64.mul (local.get $h) (local.get $sixth)))
                    (f64.mul (f64.mul (f64.const 0.075) (local.get $h)) (local.get $h)))))))
            (if (local.get $capMode)
              (then
                (br_if $nextPair (i32.and (local.get $needs)
                  (i32.xor (i32.trunc_sat_f64_u (f64.load offset=56 (local.get $o))) (i32.const -1))))))
            (local.set $travel (f64.mul (local.get $km) (local.get $minPerKm)))
            (block $coded
              (if (f64.lt (local.get $travel) (local.get $edgeBelow))
                (then)
                (else
                  (if (i32.or
                        (f64.le (f64.abs (f64.sub (local.get $travel) (local.get $maxTravel)))
                          (f64.mul (local.get $edge) (f64.add (local.get $maxTravel) (local.get $travel))))
                        (f64.ne (local.get $travel) (local.get $travel)))
                    (then
                      ;; Near the limit: the caller's exact formula decides.
                      (i32.store (i32.add (local.get $defer) (i32.shl (local.get $nDefer) (i32.const 2))) (local.get $len))
                      (local.set $nDefer (i32.add (local.get $nDefer) (i32.const 1)))
                      (local.set $code (i32.const 255))
                      (br $coded)))
                  (br_if $nextPair (i32.eqz (f64.le (local.get $travel) (local.get $maxTravel))))))
              (local.set $wait (f64.sub (f64.load offset=48 (local.get $o)) (local.get $t)))
              (local.set $c (f64.add (local.get $travel)
                (select (f64.mul (local.get $waitPerMs) (local.get $wait)) (f64.const 0) (f64.gt (local.get $wait) (f64.const 0)))))
              ;; costCode: the top code at P or more, else floor(c / step) below it.
              (if (f64.lt (local.get $c) (local.get $P))
                (then
                  (local.set $code (i32.trunc_sat_f64_s (f64.mul (local.get $c) (local.get $perStep))))
                  (if (i32.ge_s (local.get $code) (local.get $top))
                    (then (local.set $code (i32.sub (local.get $top) (i32.const 1))))))
                (else (local.set $code (local.get $top)))))
            (i32.store (i32.add (local.get $outCols) (i32.shl (local.get $len) (i32.const 2))) (local.get $j))
            (i32.store8 (i32.add (local.get $outCodes) (local.get $len)) (local.get $code))
            (local.set $len (i32.add (local.get $len) (i32.const 1)))
            (br $nextPair)))
        (i32.store offset=4 (local.get $cell) (local.get $keep))
        (local.set $q (i32.add (local.get $q) (i32.const 1)))
        (br $nextCell)))
    (i32.store (local.get $out) (local.get $nDefer))
    (local.get $len))

  ;; Returns 1 when the row spans more than $span columns (its u16 columns are zeros).
  (func (export "place")
    (param $cols i32) (param $codes i32) (param $len i32) (param $dstCols i32) (param $dstCodes i32) (param $span i32) (param $out i32)
    (result i32)
    (local $i i32) (local $j i32) (local $lo i32) (local $hi i32) (local $wide i32)
    (local.set $lo (i32.load (local.get $cols)))
    (local.set $hi (local.get $lo))
    (local.set $i (i32.const 1))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $i) (local.get $len)))
        (local.set $j (i32.load (i32.add (local.get $cols) (i32.shl (local.get $i) (i32.const 2)))))
        (if (i32.lt_s (local.get $j) (local.get $lo)) (then (local.set $lo (local.get $j))))
        (if (i32.gt_s (local.get $j) (local.get $hi)) (then (local.set $hi (local.get $j))))
        (local.set $i (i32.add (local.get $i) (i32.const 1)))
        (br $next)))
    (i32.store offset=8 (local.get $out) (local.get $lo))
    (i32.store offset=12 (local.get $out) (local.get $hi))
    (local.set $wide (i32.gt_s (i32.sub (local.get $hi) (local.get $lo)) (local.get $span)))
    (local.set $i (i32.const 0))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $i) (local.get $len)))
        (i32.store16 (i32.add (local.get $dstCols) (i32.shl (local.get $i) (i32.const 1)))
          (select (i32.const 0)
            (i32.sub (i32.load (i32.add (local.get $cols) (i32.shl (local.get $i) (i32.const 2)))) (local.get $lo))
            (local.get $wide)))
        (local.set $i (i32.add (local.get $i) (i32.const 1)))
        (br $next)))
    (memory.copy (local.get $dstCodes) (local.get $codes) (local.get $len))
    (local.get $wide)))
