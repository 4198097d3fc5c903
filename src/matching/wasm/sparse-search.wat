;; One shortest-augmenting-path search of a sparse assignment with unmatched costs
;; (src/matching/sparse.ts, SparseSearch.run), run in WebAssembly: every array in the
;; (shared) memory of the assignment that grows between solves (incremental.ts). It
;; does what the JavaScript search does, operation for operation in the same order,
;; so its prices and pairs are the same to the last bit.
;;
;; Arrays (byte offsets): rows by $rowStart / $rowEnd (i32 a row) into $colIdx (i32)
;; and $cost (f64); $delta and $u (f64 a row); $rowToCol, $colToRow (i32, -1 for none);
;; $pd (per column its price and tentative distance, f64 pairs); $pred, $hpos, $hcol
;; (i32 a column) and $hkey (f64) for the heap; $touched, $settled (i32) and
;; $settledDist (f64) for the columns one search reached and settled.
;;
;; Returns the pairs scanned, or -1 when the row can be matched nowhere (the caller
;; raises the error; with finite unmatched costs it cannot happen).
(module
  (import "env" "memory" (memory 1 65536 shared))

  (func $heapUp (param $key i32) (param $item i32) (param $pos i32) (param $p i32) (param $k f64) (param $id i32)
    (local $parent i32) (local $pk f64) (local $pi i32)
    (block $done
      (loop $up
        (br_if $done (i32.le_s (local.get $p) (i32.const 0)))
        (local.set $parent (i32.shr_s (i32.sub (local.get $p) (i32.const 1)) (i32.const 1)))
        (local.set $pk (f64.load (i32.add (local.get $key) (i32.shl (local.get $parent) (i32.const 3)))))
        (br_if $done (f64.le (local.get $pk) (local.get $k)))
        (local.set $pi (i32.load (i32.add (local.get $item) (i32.shl (local.get $parent) (i32.const 2)))))
        (f64.store (i32.add (local.get $key) (i32.shl (local.get $p) (i32.const 3))) (local.get $pk))
        (i32.store (i32.add (local.get $item) (i32.shl (local.get $p) (i32.const 2))) (local.get $pi))
        (i32.store (i32.add (local.get $pos) (i32.shl (local.get $pi) (i32.const 2))) (local.get $p))
        (local.set $p (local.get $parent))
        (br $up)))
    (f64.store (i32.add (local.get $key) (i32.shl (local.get $p) (i32.const 3))) (local.get $k))
    (i32.store (i32.add (local.get $item) (i32.shl (local.get $p) (i32.const 2))) (local.get $id))
    (i32.store (i32.add (local.get $pos) (i32.shl (local.get $id) (i32.const 2))) (local.get $p)))

  ;; Removes the root of a heap of $size items: the last item moves down from slot 0.
  (func $heapPopRoot (param $key i32) (param $item i32) (param $pos i32) (param $size i32)
    (local $n i32) (local $lk f64) (local $li i32) (local $p i32) (local $c i32) (local $ck f64) (local $ci i32)
    (local.set $n (i32.sub (local.get $size) (i32.const 1)))
    (if (i32.le_s (local.get $n) (i32.const 0)) (then (return)))
    (local.set $lk (f64.load (i32.add (local.get $key) (i32.shl (local.get $n) (i32.const 3)))))
    (local.set $li (i32.load (i32.add (local.get $item) (i32.shl (local.get $n) (i32.const 2)))))
    (local.set $p (i32.const 0))
    (block $done
      (loop $down
        (local.set $c (i32.add (i32.shl (local.get $p) (i32.const 1)) (i32.const 1)))
        (br_if $done (i32.ge_s (local.get $c) (local.get $n)))
        (local.set $ck (f64.load (i32.add (local.get $key) (i32.shl (local.get $c) (i32.const 3)))))
        (if (i32.lt_s (i32.add (local.get $c) (i32.const 1)) (local.get $n))
          (then
            (if (f64.lt (f64.load (i32.add (local.get $key) (i32.shl (i32.add (local.get $c) (i32.const 1)) (i32.const 3)))) (local.get $ck))
              (then
                (local.set $c (i32.add (local.get $c) (i32.const 1)))
                (local.set $ck (f64.load (i32.add (local.get $key) (i32.shl (local.get $c) (i32.const 3)))))))))
        (br_if $done (f64.ge (local.get $ck) (local.get $lk)))
        (local.set $ci (i32.load (i32.add (local.get $item) (i32.shl (local.get $c) (i32.const 2)))))
        (f64.store (i32.add (local.get $key) (i32.shl (local.get $p) (i32.const 3))) (local.get $ck))
        (i32.store (i32.add (local.get $item) (i32.shl (local.get $p) (i32.const 2))) (local.get $ci))
        (i32.store (i32.add (local.get $pos) (i32.shl (local.get $ci) (i32.const 2))) (local.get $p))
        (local.set $p (local.get $c))
        (br $down)))
    (f64.store (i32.add (local.get $key) (i32.shl (local.get $p) (i32.const 3))) (local.get $lk))
    (i32.store (i32.add (local.get $item) (i32.shl (local.get $p) (i32.const 2))) (local.get $li))
    (i32.store (i32.add (local.get $pos) (i32.shl (local.get $li) (i32.const 2))) (local.get $p)))

  (func (export "run")
    (param $rowStart i32) (param $rowEnd i32) (param $colIdx i32) (param $cost i32)
    (param $delta i32) (param $u i32) (param $rowToCol i32) (param $colToRow i32)
    (param $pd i32) (param $pred i32) (param $hpos i32) (param $hcol i32) (param $hkey i32)
    (param $touched i32) (param $settled i32) (param $settledDist i32) (param $r0 i32)
    (result i32)
    (local $nTouched i32) (local $nSettled i32) (local $hsize i32) (local $scanned i32)
    (local $bestPriv f64) (local $privRow i32) (local $bestSink f64) (local $sink i32)
    (local $i i32) (local $base f64) (local $ui f64) (local $j i32) (local $x f64) (local $p i32)
    (local $bound f64) (local $start i32) (local $end i32) (local $off f64) (local $e i32) (local $dj f64)
    (local $dmin f64) (local $toColumn i32) (local $minVal f64) (local $t i32) (local $d f64) (local $ri i32)
    (local $at i32) (local $prev i32)
    (local.set $bestPriv (f64.const inf))
    (local.set $privRow (i32.const -1))
    (local.set $bestSink (f64.const inf))
    (local.set $sink (i32.const -1))
    (local.set $i (local.get $r0))
    (local.set $bound (f64.const inf))
    (block $searched
      (loop $grow
        ;; The row's own unmatched option.
        (local.set $x (f64.sub (f64.add (local.get $base)
          (f64.load (i32.add (local.get $delta) (i32.shl (local.get $i) (i32.const 3))))) (local.get $ui)))
        (if (f64.lt (local.get $x) (local.get $bestPriv))
          (then
            (local.set $bestPriv (local.get $x))
            (local.set $privRow (local.get $i))
            (if (f64.lt (local.get $x) (local.get $bound)) (then (local.set $bound (local.get $x))))))
        (local.set $start (i32.load (i32.add (local.get $rowStart) (i32.shl (local.get $i) (i32.const 2)))))
        (local.set $end (i32.load (i32.add (local.get $rowEnd) (i32.shl (local.get $i) (i32.const 2)))))
        (local.set $off (f64.sub (local.get $base) (local.get $ui)))
        (local.set $e (local.get $start))
        (block $rowDone
          (loop $pair
            (br_if $rowDone (i32.ge_s (local.get $e) (local.get $end)))
            (local.set $j (i32.load (i32.add (local.get $colIdx) (i32.shl (local.get $e) (i32.const 2)))))
            (local.set $at (i32.add (local.get $pd) (i32.shl (local.get $j) (i32.const 4))))
            (local.set $dj (f64.load offset=8 (local.get $at)))
            (local.set $x (f64.sub (f64.add (local.get $off)
              (f64.load (i32.add (local.get $cost) (i32.shl (local.get $e) (i32.const 3))))) (f64.load (local.get $at))))
            (local.set $e (i32.add (local.get $e) (i32.const 1)))
            ;; (Also skips settled columns, whose distance is -inf.)
            (br_if $pair (i32.eqz (f64.lt (local.get $x) (local.get $dj))))
            (br_if $pair (f64.ge (local.get $x) (local.get $bound)))
            (if (f64.eq (local.get $dj) (f64.const inf))
              (then
                (i32.store (i32.add (local.get $touched) (i32.shl (local.get $nTouched) (i32.const 2))) (local.get $j))
                (local.set $nTouched (i32.add (local.get $nTouched) (i32.const 1)))))
            (f64.store offset=8 (local.get $at) (local.get $x))
            (i32.store (i32.add (local.get $pred) (i32.shl (local.get $j) (i32.const 2))) (local.get $i))
            (if (i32.eq (i32.load (i32.add (local.get $colToRow) (i32.shl (local.get $j) (i32.const 2)))) (i32.const -1))
              (then
                (if (f64.lt (local.get $x) (local.get $bestSink))
                  (then
                    (local.set $bestSink (local.get $x))
                    (local.set $sink (local.get $j))
                    (if (f64.lt (local.get $x) (local.get $bound)) (then (local.set $bound (local.get $x))))))
                (br $pair)))
            (if (f64.eq (local.get $dj) (f64.const inf))
              (then
                (local.set $p (local.get $hsize))
                (local.set $hsize (i32.add (local.get $hsize) (i32.const 1))))
              (else
                (local.set $p (i32.load (i32.add (local.get $hpos) (i32.shl (local.get $j) (i32.const 2)))))))
            (call $heapUp (local.get $hkey) (local.get $hcol) (local.get $hpos) (local.get $p) (local.get $x) (local.get $j))
            (br $pair)))
        (local.set $scanned (i32.add (local.get $scanned) (i32.sub (local.get $end) (local.get $start))))
        (br_if $searched (i32.eqz (local.get $hsize)))
        (br_if $searched (f64.ge (f64.load (local.get $hkey)) (local.get $bound)))
        (local.set $j (i32.load (local.get $hcol)))
        (local.set $dmin (f64.load (local.get $hkey)))
        (call $heapPopRoot (local.get $hkey) (local.get $hcol) (local.get $hpos) (local.get $hsize))
        (local.set $hsize (i32.sub (local.get $hsize) (i32.const 1)))
        (f64.store offset=8 (i32.add (local.get $pd) (i32.shl (local.get $j) (i32.const 4))) (f64.const -inf))
        (f64.store (i32.add (local.get $settledDist) (i32.shl (local.get $nSettled) (i32.const 3))) (local.get $dmin))
        (i32.store (i32.add (local.get $settled) (i32.shl (local.get $nSettled) (i32.const 2))) (local.get $j))
        (local.set $nSettled (i32.add (local.get $nSettled) (i32.const 1)))
        (local.set $i (i32.load (i32.add (local.get $colToRow) (i32.shl (local.get $j) (i32.const 2)))))
        (local.set $base (local.get $dmin))
        (local.set $ui (f64.load (i32.add (local.get $u) (i32.shl (local.get $i) (i32.const 3)))))
        (br $grow)))
    (local.set $toColumn (i32.and (i32.ne (local.get $sink) (i32.const -1)) (f64.le (local.get $bestSink) (local.get $bestPriv))))
    (local.set $minVal (select (local.get $bestSink) (local.get $bestPriv) (local.get $toColumn)))
    (if (f64.eq (local.get $minVal) (f64.const inf))
      (then
        (call $reset (local.get $pd) (local.get $touched) (local.get $nTouched))
        (return (i32.const -1))))
    ;; The dual update on everything settled closer than the terminal.
    (local.set $t (i32.const 0))
    (block $updated
      (loop $settle
        (br_if $updated (i32.ge_s (local.get $t) (local.get $nSettled)))
        (local.set $d (f64.sub (local.get $minVal) (f64.load (i32.add (local.get $settledDist) (i32.shl (local.get $t) (i32.const 3))))))
        (if (f64.gt (local.get $d) (f64.const 0))
          (then
            (local.set $j (i32.load (i32.add (local.get $settled) (i32.shl (local.get $t) (i32.const 2)))))
            (local.set $at (i32.add (local.get $pd) (i32.shl (local.get $j) (i32.const 4))))
            (f64.store (local.get $at) (f64.sub (f64.load (local.get $at)) (local.get $d)))
            (local.set $ri (i32.load (i32.add (local.get $colToRow) (i32.shl (local.get $j) (i32.const 2)))))
            (local.set $at (i32.add (local.get $u) (i32.shl (local.get $ri) (i32.const 3))))
            (f64.store (local.get $at) (f64.add (f64.load (local.get $at)) (local.get $d)))))
        (local.set $t (i32.add (local.get $t) (i32.const 1)))
        (br $settle)))
    (f64.store (i32.add (local.get $u) (i32.shl (local.get $r0) (i32.const 3))) (local.get $minVal))
    ;; shiftAlongPath (reduction.ts): the rows on the path move one column over.
    (local.set $j (select (local.get $sink) (i32.const -1) (local.get $toColumn)))
    (if (i32.eq (local.get $j) (i32.const -1))
      (then
        (local.set $j (select (i32.const -1)
          (i32.load (i32.add (local.get $rowToCol) (i32.shl (local.get $privRow) (i32.const 2))))
          (i32.eq (local.get $privRow) (local.get $r0))))
        (i32.store (i32.add (local.get $rowToCol) (i32.shl (local.get $privRow) (i32.const 2))) (i32.const -1))
        (f64.store (i32.add (local.get $u) (i32.shl (local.get $privRow) (i32.const 3)))
          (f64.load (i32.add (local.get $delta) (i32.shl (local.get $privRow) (i32.const 3)))))
        (if (i32.ne (local.get $j) (i32.const -1))
          (then (i32.store (i32.add (local.get $colToRow) (i32.shl (local.get $j) (i32.const 2))) (i32.const -1))))))
    (block $shifted
      (loop $shift
        (br_if $shifted (i32.eq (local.get $j) (i32.const -1)))
        (local.set $i (i32.load (i32.add (local.get $pred) (i32.shl (local.get $j) (i32.const 2)))))
        (local.set $prev (select (i32.const -1)
          (i32.load (i32.add (local.get $rowToCol) (i32.shl (local.get $i) (i32.const 2))))
          (i32.eq (local.get $i) (local.get $r0))))
        (i32.store (i32.add (local.get $rowToCol) (i32.shl (local.get $i) (i32.const 2))) (local.get $j))
        (i32.store (i32.add (local.get $colToRow) (i32.shl (local.get $j) (i32.const 2))) (local.get $i))
        (local.set $j (local.get $prev))
        (br $shift)))
    (call $reset (local.get $pd) (local.get $touched) (local.get $nTouched))
    (local.get $scanned))

  ;; The columns a search reached are unreached again.
  (func $reset (param $pd i32) (param $touched i32) (param $n i32)
    (local $t i32)
    (block $done
      (loop $next
        (br_if $done (i32.ge_s (local.get $t) (local.get $n)))
        (f64.store offset=8
          (i32.add (local.get $pd) (i32.shl (i32.load (i32.add (local.get $touched) (i32.shl (local.get $t) (i32.const 2)))) (i32.const 4)))
          (f64.const inf))
        (local.set $t (i32.add (local.get $t) (i32.const 1)))
        (br $next)))))
