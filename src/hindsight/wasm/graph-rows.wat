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
;; $visit is the first candidates' look at a finished row (candidates.ts
;; FirstCandidates.row), over arrays the kernel memory holds for them: the row's k
;; cheapest (by code) into $bestCode / $bestEdge, each column's k cheapest into its heap
;; ($colCode / $colEdge, k a column, $colBar its top), and with $greedy the free column
;; that leaves first ($taken, $supplyEnd), whose place in the row goes to $out + 16.
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

  ;; Returns how many of the row's cheapest it holds (at most $k).
  (func (export "visit")
    (param $cols i32) (param $codes i32) (param $len i32) (param $start i32) (param $k i32)
    (param $colCode i32) (param $colEdge i32) (param $colBar i32) (param $bestCode i32) (param $bestEdge i32)
    (param $greedy i32) (param $taken i32) (param $supplyEnd i32) (param $top i32) (param $out i32)
    (result i32)
    (local $i i32) (local $j i32) (local $c i32) (local $e i32) (local $n i32) (local $p i32) (local $ch i32) (local $base i32)
    (local $bestI i32) (local $bestEnd f64) (local $bestC i32) (local $en f64) (local $at i32)
    (local.set $bestI (i32.const -1))
    (local.set $bestEnd (f64.const inf))
    (local.set $bestC (local.get $top))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $i) (local.get $len)))
        (block $pair
          (local.set $j (i32.load (i32.add (local.get $cols) (i32.shl (local.get $i) (i32.const 2)))))
          (local.set $c (i32.load8_u (i32.add (local.get $codes) (local.get $i))))
          (br_if $pair (i32.eq (local.get $c) (local.get $top)))
          (local.set $e (i32.add (local.get $start) (local.get $i)))
          ;; The earliest-deadline pick: the free column that leaves first (cheapest on a tie).
          (if (local.get $greedy)
            (then
              (if (i32.eqz (i32.load8_u (i32.add (local.get $taken) (local.get $j))))
                (then
                  (local.set $en (f64.load (i32.add (local.get $supplyEnd) (i32.shl (local.get $j) (i32.const 3)))))
                  (if (i32.or (f64.lt (local.get $en) (local.get $bestEnd))
                        (i32.and (f64.eq (local.get $en) (local.get $bestEnd)) (i32.lt_s (local.get $c) (local.get $bestC))))
                    (then
                      (local.set $bestEnd (local.get $en))
                      (local.set $bestC (local.get $c))
                      (local.set $bestI (local.get $i))))))))
          ;; The row's k cheapest, by insertion into a small sorted buffer.
          (if (i32.or (i32.lt_s (local.get $n) (local.get $k))
                (i32.lt_s (local.get $c) (i32.load (i32.add (local.get $bestCode) (i32.shl (i32.sub (local.get $k) (i32.const 1)) (i32.const 2))))))
            (then
              (if (i32.lt_s (local.get $n) (local.get $k))
                (then
                  (local.set $p (local.get $n))
                  (local.set $n (i32.add (local.get $n) (i32.const 1))))
                (else (local.set $p (i32.sub (local.get $k) (i32.const 1)))))
              (block $placed
                (loop $shift
                  (br_if $placed (i32.le_s (local.get $p) (i32.const 0)))
                  (local.set $at (i32.add (local.get $bestCode) (i32.shl (i32.sub (local.get $p) (i32.const 1)) (i32.const 2))))
                  (br_if $placed (i32.le_s (i32.load (local.get $at)) (local.get $c)))
                  (i32.store offset=4 (local.get $at) (i32.load (local.get $at)))
                  (local.set $at (i32.add (local.get $bestEdge) (i32.shl (i32.sub (local.get $p) (i32.const 1)) (i32.const 2))))
                  (i32.store offset=4 (local.get $at) (i32.load (local.get $at)))
                  (local.set $p (i32.sub (local.get $p) (i32.const 1)))
                  (br $shift)))
              (i32.store (i32.add (local.get $bestCode) (i32.shl (local.get $p) (i32.const 2))) (local.get $c))
              (i32.store (i32.add (local.get $bestEdge) (i32.shl (local.get $p) (i32.const 2))) (local.get $e))))
          ;; The column's k cheapest so far: its heap's top leaves, the pair sifts down.
          (if (i32.lt_s (local.get $c) (i32.load (i32.add (local.get $colBar) (i32.shl (local.get $j) (i32.const 2)))))
            (then
              (local.set $base (i32.mul (local.get $j) (local.get $k)))
              (local.set $p (i32.const 0))
              (block $sifted
                (loop $sift
                  (local.set $ch (i32.add (i32.shl (local.get $p) (i32.const 1)) (i32.const 1)))
                  (br_if $sifted (i32.ge_s (local.get $ch) (local.get $k)))
                  (if (i32.lt_s (i32.add (local.get $ch) (i32.const 1)) (local.get $k))
                    (then
                      (if (i32.gt_s
                            (i32.load (i32.add (local.get $colCode) (i32.shl (i32.add (i32.add (local.get $base) (local.get $ch)) (i32.const 1)) (i32.const 2))))
                            (i32.load (i32.add (local.get $colCode) (i32.shl (i32.add (local.get $base) (local.get $ch)) (i32.const 2)))))
                        (then (local.set $ch (i32.add (local.get $ch) (i32.const 1)))))))
                  (br_if $sifted (i32.eqz (i32.gt_s
                    (i32.load (i32.add (local.get $colCode) (i32.shl (i32.add (local.get $base) (local.get $ch)) (i32.const 2))))
                    (local.get $c))))
                  (i32.store (i32.add (local.get $colCode) (i32.shl (i32.add (local.get $base) (local.get $p)) (i32.const 2)))
                    (i32.load (i32.add (local.get $colCode) (i32.shl (i32.add (local.get $base) (local.get $ch)) (i32.const 2)))))
                  (i32.store (i32.add (local.get $colEdge) (i32.shl (i32.add (local.get $base) (local.get $p)) (i32.const 2)))
                    (i32.load (i32.add (local.get $colEdge) (i32.shl (i32.add (local.get $base) (local.get $ch)) (i32.const 2)))))
                  (local.set $p (local.get $ch))
                  (br $sift)))
              (i32.store (i32.add (local.get $colCode) (i32.shl (i32.add (local.get $base) (local.get $p)) (i32.const 2))) (local.get $c))
              (i32.store (i32.add (local.get $colEdge) (i32.shl (i32.add (local.get $base) (local.get $p)) (i32.const 2))) (local.get $e))
              (i32.store (i32.add (local.get $colBar) (i32.shl (local.get $j) (i32.const 2)))
                (i32.load (i32.add (local.get $colCode) (i32.shl (local.get $base) (i32.const 2))))))))
        (local.set $i (i32.add (local.get $i) (i32.const 1)))
        (br $next)))
    (i32.store offset=16 (local.get $out) (local.get $bestI))
    (local.get $n))

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
