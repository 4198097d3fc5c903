;; pairflow's dense shortest-augmenting-path kernel (Jonker–Volgenant style) for a
;; square instance where every row is matched: column reduction, reduction transfer,
;; two passes of augmenting row reduction, then one Dijkstra-like search per free row
;; over whole rows against the column prices. The same steps as the JS full search of
;; dense.ts; f64 arithmetic is IEEE in wasm, each reduced cost is computed in the same
;; order as there.
;;
;; Memory (byte offsets from the caller, 16-byte aligned; np = n rounded up to a
;; multiple of 16, the padding columns never taken):
;;   C    n*n f64 costs, row-major, plus 128 bytes of slack after the last row
;;   V    np f64 column prices          U    np f64 row prices
;;   R2C  np i32 row -> column          C2R  np i32 column -> row (-1 free)
;;   W    scratch, 8 * np * 8 bytes (see $solve)
;; Returns the number of searches run, or
;;   -1 a cell is -Infinity (the caller names it), -2 infeasible (a column or row with
;;   no allowed pair: the caller's JS path reports it), -3 gave up (more than 1.5 maxFree
;;   rows without a column after column reduction, more than maxFree rows left for the
;;   searches, or more than maxScan pairs read; the
;;   caller solves by its JS path), -4 no predecessor
;;   found for a column of the path (cannot happen: the caller falls back all the same).
;; The pairs read are left in the global "scanned".
;; The exports rowMinima, columnsAt and freeAt run the greedy pass of dense.ts's
;; row-minima start and its paths of two tight pairs, on rows the caller copies in a
;; few at a time (see wasmRowMinima in dense-jv.ts).
(module
  ;; The caller's memory, created at the size each solve needs: growing a memory detaches
  ;; its old buffer, and after any detach V8 checks every typed-array access in JS.
  (import "env" "memory" (memory 1))
  (global $scanned (export "scanned") (mut f64) (f64.const 0))
  (global $ties (export "ties") (mut f64) (f64.const 0))
  (global $u1 (mut f64) (f64.const 0))
  (global $u2 (mut f64) (f64.const 0))
  (global $j1 (mut i32) (i32.const 0))
  (global $j2 (mut i32) (i32.const 0))

  ;; p[0 .. len) = x (len even, p 16-byte aligned)
  (func $fill (param $p i32) (param $len i32) (param $x f64)
    (local $e i32) (local $xv v128)
    (local.set $xv (f64x2.splat (local.get $x)))
    (local.set $e (i32.add (local.get $p) (i32.shl (local.get $len) (i32.const 3))))
    (block $out (loop $l
      (br_if $out (i32.ge_u (local.get $p) (local.get $e)))
      (v128.store (local.get $p) (local.get $xv))
      (local.set $p (i32.add (local.get $p) (i32.const 16)))
      (br $l))))

  ;; Column reduction: V[j] = min over rows of C[r][j], ARG[j] (i64) = first such row;
  ;; a call of $foldRow per row, so the engine optimises it while this runs.
  (func $colReduce (param $n i32) (param $np i32) (param $C i32) (param $V i32) (param $ARG i32)
    (local $r i32) (local $rowBytes i32)
    (call $fill (local.get $V) (local.get $np) (f64.const inf))
    (memory.fill (local.get $ARG) (i32.const 255) (i32.shl (local.get $np) (i32.const 3)))
    (local.set $rowBytes (i32.shl (local.get $n) (i32.const 3)))
    (block $rd (loop $rl
      (br_if $rd (i32.ge_u (local.get $r) (local.get $n)))
      (call $foldRow (i32.add (local.get $C) (i32.mul (local.get $r) (local.get $rowBytes)))
        (local.get $V) (local.get $ARG) (local.get $np) (local.get $r))
      (local.set $r (i32.add (local.get $r) (i32.const 1)))
      (br $rl))))

  ;; One row of the column reduction: V[j] = min(V[j], C[j]), ARG[j] = r where lowered.
  (func $foldRow (param $pc i32) (param $pv i32) (param $pa i32) (param $np i32) (param $r i32)
    (local $e i32) (local $rs v128) (local $c v128) (local $v v128) (local $m v128)
    (local.set $e (i32.add (local.get $pv) (i32.shl (local.get $np) (i32.const 3))))
    (local.set $rs (i64x2.splat (i64.extend_i32_u (local.get $r))))
    (block $cd (loop $cl
      (br_if $cd (i32.ge_u (local.get $pv) (local.get $e)))
      (local.set $c (v128.load (local.get $pc)))
      (local.set $v (v128.load (local.get $pv)))
      (local.set $m (f64x2.lt (local.get $c) (local.get $v)))
      (v128.store (local.get $pv) (v128.bitselect (local.get $c) (local.get $v) (local.get $m)))
      (v128.store (local.get $pa) (v128.bitselect (local.get $rs) (v128.load (local.get $pa)) (local.get $m)))
      (local.set $pc (i32.add (local.get $pc) (i32.const 16)))
      (local.set $pv (i32.add (local.get $pv) (i32.const 16)))
      (local.set $pa (i32.add (local.get $pa) (i32.const 16)))
      (br $cl))))

  ;; min over j < np of (C[j] - V[j]), NaN skipped (pmin keeps the accumulator).
  (func $rowMin (param $pc i32) (param $V i32) (param $np i32) (result f64)
    (local $pv i32) (local $e i32) (local $acc v128) (local $acc2 v128)
    (local.set $acc (f64x2.splat (f64.const inf)))
    (local.set $acc2 (local.get $acc))
    (local.set $pv (local.get $V))
    (local.set $e (i32.add (local.get $V) (i32.shl (local.get $np) (i32.const 3))))
    (block $out (loop $l
      (br_if $out (i32.ge_u (local.get $pv) (local.get $e)))
      (local.set $acc (f64x2.pmin (local.get $acc)
        (f64x2.sub (v128.load (local.get $pc)) (v128.load (local.get $pv)))))
      (local.set $acc2 (f64x2.pmin (local.get $acc2)
        (f64x2.sub (v128.load offset=16 (local.get $pc)) (v128.load offset=16 (local.get $pv)))))
      (local.set $pc (i32.add (local.get $pc) (i32.const 32)))
      (local.set $pv (i32.add (local.get $pv) (i32.const 32)))
      (br $l)))
    (local.set $acc (f64x2.pmin (local.get $acc) (local.get $acc2)))
    (f64.min (f64x2.extract_lane 0 (local.get $acc)) (f64x2.extract_lane 1 (local.get $acc))))

  ;; The row's two lowest reduced costs C[j] - V[j] into $u1 <= $u2, their columns into
  ;; $j1 != $j2 (the first columns at those values; -1 when the value is +Infinity).
  (func $twoCheapest (param $pc i32) (param $V i32) (param $n i32) (param $np i32)
    (local $pv i32) (local $e i32) (local $x v128) (local $a v128) (local $b v128)
    (local $a1 f64) (local $a2 f64) (local $b1 f64) (local $b2 f64) (local $u1 f64) (local $u2 f64)
    (local $j i32) (local $xs f64) (local $j1 i32) (local $j2 i32) (local $k i32) (local $uv1 v128) (local $uv2 v128)
    (local.set $a (f64x2.splat (f64.const inf)))
    (local.set $b (local.get $a))
    (local.set $pv (local.get $V))
    (local.set $e (i32.add (local.get $V) (i32.shl (local.get $np) (i32.const 3))))
    (local.set $j (local.get $pc))
    (block $out (loop $l
      (br_if $out (i32.ge_u (local.get $pv) (local.get $e)))
      (local.set $x (f64x2.sub (v128.load (local.get $j)) (v128.load (local.get $pv))))
      ;; second = pmin(second, pmax(x, first)); first = pmin(first, x); NaN leaves both
      (local.set $b (f64x2.pmin (local.get $b) (f64x2.pmax (local.get $x) (local.get $a))))
      (local.set $a (f64x2.pmin (local.get $a) (local.get $x)))
      (local.set $j (i32.add (local.get $j) (i32.const 16)))
      (local.set $pv (i32.add (local.get $pv) (i32.const 16)))
      (br $l)))
    (local.set $a1 (f64x2.extract_lane 0 (local.get $a)))
    (local.set $b1 (f64x2.extract_lane 1 (local.get $a)))
    (local.set $a2 (f64x2.extract_lane 0 (local.get $b)))
    (local.set $b2 (f64x2.extract_lane 1 (local.get $b)))
    (local.set $u1 (f64.min (local.get $a1) (local.get $b1)))
    (local.set $u2 (f64.min (f64.max (local.get $a1) (local.get $b1)) (f64.min (local.get $a2) (local.get $b2))))
    (local.set $j1 (i32.const -1))
    (local.set $j2 (i32.const -1))
    (if (f64.lt (local.get $u1) (f64.const inf)) (then
      ;; the columns: two at a time, looked at one by one only where a lane holds u1 or u2
      (local.set $uv1 (f64x2.splat (local.get $u1)))
      (local.set $uv2 (f64x2.splat (local.get $u2)))
      (local.set $j (i32.const 0))
      (block $done (loop $s
        (br_if $done (i32.ge_u (local.get $j) (local.get $n)))
        (local.set $x (f64x2.sub
          (v128.load (i32.add (local.get $pc) (i32.shl (local.get $j) (i32.const 3))))
          (v128.load (i32.add (local.get $V) (i32.shl (local.get $j) (i32.const 3))))))
        (if (v128.any_true (v128.or (f64x2.eq (local.get $x) (local.get $uv1)) (f64x2.eq (local.get $x) (local.get $uv2)))) (then
          (local.set $k (local.get $j))
          (local.set $e (i32.add (local.get $j) (i32.const 2)))
          (block $lanesDone (loop $lane
            (br_if $lanesDone (i32.ge_u (local.get $k) (select (local.get $n) (local.get $e) (i32.lt_u (local.get $n) (local.get $e)))))
            (local.set $xs (f64.sub
              (f64.load (i32.add (local.get $pc) (i32.shl (local.get $k) (i32.const 3))))
              (f64.load (i32.add (local.get $V) (i32.shl (local.get $k) (i32.const 3))))))
            (if (i32.and (i32.lt_s (local.get $j1) (i32.const 0)) (f64.eq (local.get $xs) (local.get $u1)))
              (then (local.set $j1 (local.get $k)))
              (else
                (if (i32.and (i32.lt_s (local.get $j2) (i32.const 0)) (f64.eq (local.get $xs) (local.get $u2)))
                  (then (local.set $j2 (local.get $k))))))
            (local.set $k (i32.add (local.get $k) (i32.const 1)))
            (br $lane)))
          (br_if $done (i32.and (i32.ge_s (local.get $j1) (i32.const 0))
            (i32.or (i32.ge_s (local.get $j2) (i32.const 0)) (f64.eq (local.get $u2) (f64.const inf)))))))
        (local.set $j (i32.add (local.get $j) (i32.const 2)))
        (br $s)))))
    (global.set $u1 (local.get $u1))
    (global.set $u2 (local.get $u2))
    (global.set $j1 (local.get $j1))
    (global.set $j2 (select (i32.const -1) (local.get $j2) (f64.eq (local.get $u2) (f64.const inf)))))

  ;; The row-minima start's greedy pass (dense.ts, solveFromRowMinima) over `rows` rows
  ;; copied to CB (row-major, n f64 each; rows r0, r0 + 1, ...): U[r] = the row's
  ;; minimum (NaN skipped), and the row takes the first column still free at that
  ;; minimum scanning from column spreadStart(r) round (R2C, C2R; -1 free), else it is
  ;; appended to the free rows F. Rows r < countBelow add their cells at the minimum to
  ;; the global "ties" (set to 0 when r0 = 0). Returns the new count of free rows, or -1 (a row's minimum is
  ;; -Infinity: the caller names the cell) or -2 (a row with no allowed pair).
  (func (export "rowMinima") (param $CB i32) (param $rows i32) (param $n i32) (param $r0 i32)
    (param $U i32) (param $R2C i32) (param $C2R i32) (param $F i32) (param $nFree i32) (param $countBelow i32) (result i32)
    (local $t i32) (local $r i32) (local $pc i32) (local $j i32) (local $s i32)
    (local $m f64)
    (if (i32.eqz (local.get $r0)) (then (global.set $ties (f64.const 0))))
    (block $done (loop $rl
      (br_if $done (i32.ge_u (local.get $t) (local.get $rows)))
      (local.set $r (i32.add (local.get $r0) (local.get $t)))
      (local.set $pc (i32.add (local.get $CB) (i32.mul (local.get $t) (i32.shl (local.get $n) (i32.const 3)))))
      (local.set $m (call $minOf (local.get $pc) (local.get $n)))
      (if (f64.eq (local.get $m) (f64.const -inf)) (then (return (i32.const -1))))
      (if (i32.eqz (f64.lt (local.get $m) (f64.const inf))) (then (return (i32.const -2))))
      (f64.store (i32.add (local.get $U) (i32.shl (local.get $r) (i32.const 3))) (local.get $m))
      (if (i32.lt_u (local.get $r) (local.get $countBelow)) (then
        (global.set $ties (f64.add (global.get $ties) (f64.convert_i32_u (call $countOf (local.get $pc) (local.get $n) (local.get $m)))))))
      (local.set $j (call $freeAt (local.get $pc) (local.get $n) (local.get $C2R) (local.get $m)
        (call $spreadStart (local.get $r) (local.get $n))))
      (if (i32.lt_s (local.get $j) (i32.const 0))
        (then
          (i32.store (i32.add (local.get $F) (i32.shl (local.get $nFree) (i32.const 2))) (local.get $r))
          (local.set $nFree (i32.add (local.get $nFree) (i32.const 1))))
        (else
          (i32.store (i32.add (local.get $R2C) (i32.shl (local.get $r) (i32.const 2))) (local.get $j))
          (i32.store (i32.add (local.get $C2R) (i32.shl (local.get $j) (i32.const 2))) (local.get $r))))
      (local.set $t (i32.add (local.get $t) (i32.const 1)))
      (br $rl)))
    (local.get $nFree))

  ;; floor(frac(r * golden ratio) * n): the column a row's scan for a free tie starts
  ;; at, the same value as dense.ts's spreadStart (frac exact: x - floor(x) for x >= 0).
  (func $spreadStart (param $r i32) (param $n i32) (result i32)
    (local $x f64)
    (local.set $x (f64.mul (f64.convert_i32_u (local.get $r)) (f64.const 0.6180339887498949)))
    (i32.trunc_f64_u (f64.floor (f64.mul (f64.sub (local.get $x) (f64.floor (local.get $x))) (f64.convert_i32_u (local.get $n))))))

  ;; min over j < n of C[j] (pc need not be 16-byte aligned), NaN skipped; +Infinity when none.
  (func $minOf (param $pc i32) (param $n i32) (result f64)
    (local $e i32) (local $a v128) (local $b v128) (local $m f64) (local $x f64)
    (local.set $a (f64x2.splat (f64.const inf)))
    (local.set $b (local.get $a))
    (local.set $e (i32.add (local.get $pc) (i32.shl (local.get $n) (i32.const 3))))
    (block $o (loop $l
      (br_if $o (i32.gt_u (i32.add (local.get $pc) (i32.const 32)) (local.get $e)))
      (local.set $a (f64x2.pmin (local.get $a) (v128.load (local.get $pc))))
      (local.set $b (f64x2.pmin (local.get $b) (v128.load offset=16 (local.get $pc))))
      (local.set $pc (i32.add (local.get $pc) (i32.const 32)))
      (br $l)))
    (local.set $a (f64x2.pmin (local.get $a) (local.get $b)))
    (local.set $m (f64.min (f64x2.extract_lane 0 (local.get $a)) (f64x2.extract_lane 1 (local.get $a))))
    (block $o (loop $l
      (br_if $o (i32.ge_u (local.get $pc) (local.get $e)))
      (local.set $x (f64.load (local.get $pc)))
      (if (f64.lt (local.get $x) (local.get $m)) (then (local.set $m (local.get $x))))
      (local.set $pc (i32.add (local.get $pc) (i32.const 8)))
      (br $l)))
    (local.get $m))

  ;; The columns j < n with C[j] = m, in order, into OUT (i32); returns how many.
  (func (export "columnsAt") (param $pc i32) (param $n i32) (param $m f64) (param $OUT i32) (result i32)
    (local $j i32) (local $c i32)
    (block $o (loop $l
      (br_if $o (i32.ge_u (local.get $j) (local.get $n)))
      (if (f64.eq (f64.load (i32.add (local.get $pc) (i32.shl (local.get $j) (i32.const 3)))) (local.get $m)) (then
        (i32.store (i32.add (local.get $OUT) (i32.shl (local.get $c) (i32.const 2))) (local.get $j))
        (local.set $c (i32.add (local.get $c) (i32.const 1)))))
      (local.set $j (i32.add (local.get $j) (i32.const 1)))
      (br $l)))
    (local.get $c))

  ;; How many of C[0 .. n) equal m.
  (func $countOf (param $pc i32) (param $n i32) (param $m f64) (result i32)
    (local $e i32) (local $mv v128) (local $acc v128) (local $c i32)
    (local.set $mv (f64x2.splat (local.get $m)))
    (local.set $e (i32.add (local.get $pc) (i32.shl (local.get $n) (i32.const 3))))
    ;; each lane equal to m is all ones (-1): subtracting counts it
    (block $o (loop $l
      (br_if $o (i32.gt_u (i32.add (local.get $pc) (i32.const 16)) (local.get $e)))
      (local.set $acc (i64x2.sub (local.get $acc) (f64x2.eq (v128.load (local.get $pc)) (local.get $mv))))
      (local.set $pc (i32.add (local.get $pc) (i32.const 16)))
      (br $l)))
    (local.set $c (i32.wrap_i64 (i64.add (i64x2.extract_lane 0 (local.get $acc)) (i64x2.extract_lane 1 (local.get $acc)))))
    (if (i32.lt_u (local.get $pc) (local.get $e)) (then
      (if (f64.eq (f64.load (local.get $pc)) (local.get $m)) (then (local.set $c (i32.add (local.get $c) (i32.const 1)))))))
    (local.get $c))

  ;; The first column j, scanning from s to n - 1 then from 0, with C[j] = m and
  ;; C2R[j] < 0; -1 when there is none.
  (func $freeAt (export "freeAt") (param $pc i32) (param $n i32) (param $C2R i32) (param $m f64) (param $s i32) (result i32)
    (local $j i32) (local $left i32)
    (local.set $j (local.get $s))
    (local.set $left (local.get $n))
    (block $o (loop $l
      (br_if $o (i32.eqz (local.get $left)))
      (if (i32.ge_u (local.get $j) (local.get $n)) (then (local.set $j (i32.const 0))))
      (if (f64.eq (f64.load (i32.add (local.get $pc) (i32.shl (local.get $j) (i32.const 3)))) (local.get $m)) (then
        (if (i32.lt_s (i32.load (i32.add (local.get $C2R) (i32.shl (local.get $j) (i32.const 2)))) (i32.const 0))
          (then (return (local.get $j))))))
      (local.set $j (i32.add (local.get $j) (i32.const 1)))
      (local.set $left (i32.sub (local.get $left) (i32.const 1)))
      (br $l)))
    (i32.const -1))

  ;; One step of a search: D[j] = min(D[j], (off + C[j]) - VW[j]) over j < np, in
  ;; blocks of 16 columns; returns the lowest D and leaves in $j1 the address of the
  ;; first block holding it. np is a multiple of 16.
  (func $relax (param $pc i32) (param $VW i32) (param $D i32) (param $np i32) (param $off f64) (result f64)
    (local $pd i32) (local $e i32) (local $offv v128) (local $bestv v128) (local $blk i32) (local $m v128)
    (local $d0 v128) (local $d1 v128) (local $d2 v128) (local $d3 v128)
    (local $d4 v128) (local $d5 v128) (local $d6 v128) (local $d7 v128) (local $dv i32)
    (local.set $offv (f64x2.splat (local.get $off)))
    (local.set $bestv (f64x2.splat (f64.const inf)))
    (local.set $blk (i32.const -1))
    (local.set $pd (local.get $D))
    (local.set $dv (i32.sub (local.get $VW) (local.get $D)))
    (local.set $e (i32.add (local.get $D) (i32.shl (local.get $np) (i32.const 3))))
    (block $out (loop $l
      (br_if $out (i32.ge_u (local.get $pd) (local.get $e)))
      (local.set $d0 (f64x2.pmin (v128.load (local.get $pd))
        (f64x2.sub (f64x2.add (local.get $offv) (v128.load (local.get $pc))) (v128.load (i32.add (local.get $pd) (local.get $dv))))))
      (v128.store (local.get $pd) (local.get $d0))
      (local.set $d1 (f64x2.pmin (v128.load offset=16 (local.get $pd))
        (f64x2.sub (f64x2.add (local.get $offv) (v128.load offset=16 (local.get $pc))) (v128.load offset=16 (i32.add (local.get $pd) (local.get $dv))))))
      (v128.store offset=16 (local.get $pd) (local.get $d1))
      (local.set $d2 (f64x2.pmin (v128.load offset=32 (local.get $pd))
        (f64x2.sub (f64x2.add (local.get $offv) (v128.load offset=32 (local.get $pc))) (v128.load offset=32 (i32.add (local.get $pd) (local.get $dv))))))
      (v128.store offset=32 (local.get $pd) (local.get $d2))
      (local.set $d3 (f64x2.pmin (v128.load offset=48 (local.get $pd))
        (f64x2.sub (f64x2.add (local.get $offv) (v128.load offset=48 (local.get $pc))) (v128.load offset=48 (i32.add (local.get $pd) (local.get $dv))))))
      (v128.store offset=48 (local.get $pd) (local.get $d3))
      (local.set $d4 (f64x2.pmin (v128.load offset=64 (local.get $pd))
        (f64x2.sub (f64x2.add (local.get $offv) (v128.load offset=64 (local.get $pc))) (v128.load offset=64 (i32.add (local.get $pd) (local.get $dv))))))
      (v128.store offset=64 (local.get $pd) (local.get $d4))
      (local.set $d5 (f64x2.pmin (v128.load offset=80 (local.get $pd))
        (f64x2.sub (f64x2.add (local.get $offv) (v128.load offset=80 (local.get $pc))) (v128.load offset=80 (i32.add (local.get $pd) (local.get $dv))))))
      (v128.store offset=80 (local.get $pd) (local.get $d5))
      (local.set $d6 (f64x2.pmin (v128.load offset=96 (local.get $pd))
        (f64x2.sub (f64x2.add (local.get $offv) (v128.load offset=96 (local.get $pc))) (v128.load offset=96 (i32.add (local.get $pd) (local.get $dv))))))
      (v128.store offset=96 (local.get $pd) (local.get $d6))
      (local.set $d7 (f64x2.pmin (v128.load offset=112 (local.get $pd))
        (f64x2.sub (f64x2.add (local.get $offv) (v128.load offset=112 (local.get $pc))) (v128.load offset=112 (i32.add (local.get $pd) (local.get $dv))))))
      (v128.store offset=112 (local.get $pd) (local.get $d7))
      (local.set $m (f64x2.pmin
        (f64x2.pmin (f64x2.pmin (local.get $d0) (local.get $d1)) (f64x2.pmin (local.get $d2) (local.get $d3)))
        (f64x2.pmin (f64x2.pmin (local.get $d4) (local.get $d5)) (f64x2.pmin (local.get $d6) (local.get $d7)))))
      ;; a lane below the best so far: the block's minimum becomes the best (both lanes)
      (if (v128.any_true (f64x2.lt (local.get $m) (local.get $bestv))) (then
        (local.set $m (f64x2.pmin (local.get $m) (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $m) (local.get $m))))
        (local.set $bestv (local.get $m))
        (local.set $blk (local.get $pd))))
      (local.set $pc (i32.add (local.get $pc) (i32.const 128)))
      (local.set $pd (i32.add (local.get $pd) (i32.const 128)))
      (br $l)))
    (global.set $j1 (local.get $blk))
    (f64x2.extract_lane 0 (local.get $bestv)))

  (func (export "solve")
    (param $n i32) (param $C i32) (param $V i32) (param $U i32) (param $R2C i32) (param $C2R i32) (param $W i32)
    (param $maxScan f64) (param $maxFree i32) (result i32)
    (local $np i32) (local $j i32) (local $i i32) (local $r i32) (local $h i32) (local $t i32) (local $k i32)
    (local $ARG i32) (local $H i32) (local $F i32) (local $NX i32) (local $D i32) (local $VW i32) (local $DS i32)
    (local $SC i32) (local $RL i32) (local $OFF i32) (local $FREE i32) (local $nf i32)
    (local $save f64) (local $m f64) (local $nFree i32) (local $nNext i32) (local $budget i32) (local $pass i32)
    (local $u1 f64) (local $u2 f64) (local $j1 i32) (local $j2 i32) (local $target i32) (local $ur f64) (local $prev i32)
    (local $tie i32) (local $f i32) (local $r0 i32) (local $nDone i32) (local $base f64) (local $ui f64) (local $off f64)
    (local $best f64) (local $sink i32) (local $dj f64) (local $prevCol i32) (local $d f64) (local $searches i32)
    (local $rowBytes i32) (local $p i32)
    (local.set $np (i32.and (i32.add (local.get $n) (i32.const 15)) (i32.const -16)))
    (local.set $rowBytes (i32.shl (local.get $n) (i32.const 3)))
    ;; scratch: ARG/D (i64/f64) | H,F | NX,SC | VW | DS | RL,FREE | OFF
    (local.set $ARG (local.get $W))
    (local.set $D (local.get $W))
    (local.set $H (i32.add (local.get $W) (i32.shl (local.get $np) (i32.const 3))))
    (local.set $F (i32.add (local.get $H) (i32.shl (local.get $np) (i32.const 2))))
    (local.set $NX (i32.add (local.get $F) (i32.shl (local.get $np) (i32.const 2))))
    (local.set $SC (local.get $NX))
    (local.set $VW (i32.add (local.get $NX) (i32.shl (local.get $np) (i32.const 3))))
    (local.set $DS (i32.add (local.get $VW) (i32.shl (local.get $np) (i32.const 3))))
    (local.set $RL (i32.add (local.get $DS) (i32.shl (local.get $np) (i32.const 3))))
    (local.set $FREE (i32.add (local.get $RL) (i32.shl (local.get $np) (i32.const 2))))
    (local.set $OFF (i32.add (local.get $FREE) (i32.shl (local.get $np) (i32.const 2))))
    (global.set $scanned (f64.const 0))

    ;; ---- column reduction; a -Infinity cell or a column with no allowed pair stops here
    (call $colReduce (local.get $n) (local.get $np) (local.get $C) (local.get $V) (local.get $ARG))
    (global.set $scanned (f64.convert_i32_u (i32.mul (local.get $n) (local.get $n))))
    (local.set $j (i32.const 0))
    (block $d (loop $l
      (br_if $d (i32.ge_u (local.get $j) (local.get $n)))
      (if (f64.eq (f64.load (i32.add (local.get $V) (i32.shl (local.get $j) (i32.const 3)))) (f64.const -inf))
        (then (return (i32.const -1))))
      (if (i32.lt_s (i32.wrap_i64 (i64.load (i32.add (local.get $ARG) (i32.shl (local.get $j) (i32.const 3))))) (i32.const 0))
        (then (return (i32.const -2))))
      (local.set $j (i32.add (local.get $j) (i32.const 1)))
      (br $l)))
    ;; padding columns: price -Infinity, so every reduced cost there is +Infinity (or NaN)
    (local.set $j (local.get $n))
    (block $d (loop $l
      (br_if $d (i32.ge_u (local.get $j) (local.get $np)))
      (f64.store (i32.add (local.get $V) (i32.shl (local.get $j) (i32.const 3))) (f64.const -inf))
      (local.set $j (i32.add (local.get $j) (i32.const 1)))
      (br $l)))
    ;; each row takes the last column whose minimum it holds, preferring the cheapest
    (memory.fill (local.get $H) (i32.const 0) (i32.shl (local.get $np) (i32.const 2)))
    (memory.fill (local.get $R2C) (i32.const 255) (i32.shl (local.get $np) (i32.const 2)))
    (memory.fill (local.get $C2R) (i32.const 255) (i32.shl (local.get $np) (i32.const 2)))
    (local.set $j (local.get $n))
    (block $d (loop $l
      (br_if $d (i32.eqz (local.get $j)))
      (local.set $j (i32.sub (local.get $j) (i32.const 1)))
      (local.set $i (i32.wrap_i64 (i64.load (i32.add (local.get $ARG) (i32.shl (local.get $j) (i32.const 3))))))
      (local.set $p (i32.add (local.get $H) (i32.shl (local.get $i) (i32.const 2))))
      (local.set $h (i32.load (local.get $p)))
      (i32.store (local.get $p) (i32.add (local.get $h) (i32.const 1)))
      (local.set $k (i32.load (i32.add (local.get $R2C) (i32.shl (local.get $i) (i32.const 2)))))
      (if (i32.eqz (local.get $h))
        (then
          (i32.store (i32.add (local.get $R2C) (i32.shl (local.get $i) (i32.const 2))) (local.get $j))
          (i32.store (i32.add (local.get $C2R) (i32.shl (local.get $j) (i32.const 2))) (local.get $i)))
        (else
          (if (f64.lt (f64.load (i32.add (local.get $V) (i32.shl (local.get $j) (i32.const 3))))
                      (f64.load (i32.add (local.get $V) (i32.shl (local.get $k) (i32.const 3)))))
            (then
              (i32.store (i32.add (local.get $C2R) (i32.shl (local.get $k) (i32.const 2))) (i32.const -1))
              (i32.store (i32.add (local.get $R2C) (i32.shl (local.get $i) (i32.const 2))) (local.get $j))
              (i32.store (i32.add (local.get $C2R) (i32.shl (local.get $j) (i32.const 2))) (local.get $i))))))
      (br $l)))
    ;; more than 1.5 maxFree rows left without a column (every column cheapest in the same
    ;; few rows: c_ij = i·j, rank-one costs): the searches would be long, give up now
    (local.set $k (i32.const 0))
    (local.set $r (i32.const 0))
    (block $d (loop $l
      (br_if $d (i32.ge_u (local.get $r) (local.get $n)))
      (if (i32.lt_s (i32.load (i32.add (local.get $R2C) (i32.shl (local.get $r) (i32.const 2)))) (i32.const 0))
        (then (local.set $k (i32.add (local.get $k) (i32.const 1)))))
      (local.set $r (i32.add (local.get $r) (i32.const 1)))
      (br $l)))
    (if (f64.gt (f64.convert_i32_u (local.get $k)) (f64.mul (f64.const 1.5) (f64.convert_i32_u (local.get $maxFree))))
      (then (return (i32.const -3))))
    ;; reduction transfer: a row holding one column moves its slack onto that column's price
    (local.set $r (i32.const 0))
    (block $d (loop $l
      (br_if $d (i32.ge_u (local.get $r) (local.get $n)))
      (f64.store (i32.add (local.get $U) (i32.shl (local.get $r) (i32.const 3))) (f64.const 0))
      (local.set $j1 (i32.load (i32.add (local.get $R2C) (i32.shl (local.get $r) (i32.const 2)))))
      (if (i32.and (i32.ge_s (local.get $j1) (i32.const 0))
                   (i32.eq (i32.load (i32.add (local.get $H) (i32.shl (local.get $r) (i32.const 2)))) (i32.const 1)))
        (then
          (local.set $p (i32.add (local.get $V) (i32.shl (local.get $j1) (i32.const 3))))
          (local.set $save (f64.load (local.get $p)))
          (f64.store (local.get $p) (f64.const -inf))
          (local.set $m (call $rowMin (i32.add (local.get $C) (i32.mul (local.get $r) (local.get $rowBytes))) (local.get $V) (local.get $np)))
          (f64.store (local.get $p) (local.get $save))
          (global.set $scanned (f64.add (global.get $scanned) (f64.convert_i32_u (local.get $n))))
          (if (f64.lt (local.get $m) (f64.const inf)) (then
            (f64.store (local.get $p) (f64.sub (local.get $save) (local.get $m)))
            (f64.store (i32.add (local.get $U) (i32.shl (local.get $r) (i32.const 3))) (local.get $m))))))
      (local.set $r (i32.add (local.get $r) (i32.const 1)))
      (br $l)))

    ;; ---- augmenting row reduction, two passes
    (local.set $nFree (i32.const 0))
    (local.set $r (i32.const 0))
    (block $d (loop $l
      (br_if $d (i32.ge_u (local.get $r) (local.get $n)))
      (if (i32.lt_s (i32.load (i32.add (local.get $R2C) (i32.shl (local.get $r) (i32.const 2)))) (i32.const 0)) (then
        (i32.store (i32.add (local.get $F) (i32.shl (local.get $nFree) (i32.const 2))) (local.get $r))
        (local.set $nFree (i32.add (local.get $nFree) (i32.const 1)))))
      (local.set $r (i32.add (local.get $r) (i32.const 1)))
      (br $l)))
    (local.set $pass (i32.const 0))
    (block $passes (loop $pl
      (br_if $passes (i32.or (i32.ge_u (local.get $pass) (i32.const 2)) (i32.eqz (local.get $nFree))))
      (local.set $nNext (i32.const 0))
      (local.set $k (i32.const 0))
      (local.set $budget (local.get $n))
      (block $rows (loop $rl
        (br_if $rows (i32.ge_u (local.get $k) (local.get $nFree)))
        (local.set $r (i32.load (i32.add (local.get $F) (i32.shl (local.get $k) (i32.const 2)))))
        (local.set $k (i32.add (local.get $k) (i32.const 1)))
        (call $twoCheapest (i32.add (local.get $C) (i32.mul (local.get $r) (local.get $rowBytes))) (local.get $V) (local.get $n) (local.get $np))
        (global.set $scanned (f64.add (global.get $scanned) (f64.convert_i32_u (local.get $n))))
        (local.set $u1 (global.get $u1))
        (local.set $u2 (global.get $u2))
        (local.set $j1 (global.get $j1))
        (local.set $j2 (global.get $j2))
        (if (i32.lt_s (local.get $j1) (i32.const 0)) (then (return (i32.const -2))))
        (local.set $tie (i32.and (f64.eq (local.get $u1) (local.get $u2))
          (i32.and (i32.ge_s (local.get $j2) (i32.const 0))
            (i32.lt_s (i32.load (i32.add (local.get $C2R) (i32.shl (local.get $j2) (i32.const 2)))) (i32.const 0)))))
        (local.set $target (local.get $j1))
        (local.set $ur (local.get $u1))
        (if (f64.lt (local.get $u1) (local.get $u2))
          (then
            (if (f64.lt (local.get $u2) (f64.const inf)) (then
              (local.set $p (i32.add (local.get $V) (i32.shl (local.get $j1) (i32.const 3))))
              (f64.store (local.get $p) (f64.sub (f64.load (local.get $p)) (f64.sub (local.get $u2) (local.get $u1))))
              (local.set $ur (local.get $u2)))))
          (else
            (if (i32.and (local.get $tie)
                  (i32.ge_s (i32.load (i32.add (local.get $C2R) (i32.shl (local.get $j1) (i32.const 2)))) (i32.const 0)))
              (then (local.set $target (local.get $j2))))))
        (local.set $p (i32.add (local.get $C2R) (i32.shl (local.get $target) (i32.const 2))))
        (local.set $prev (i32.load (local.get $p)))
        (i32.store (local.get $p) (local.get $r))
        (i32.store (i32.add (local.get $R2C) (i32.shl (local.get $r) (i32.const 2))) (local.get $target))
        (f64.store (i32.add (local.get $U) (i32.shl (local.get $r) (i32.const 3))) (local.get $ur))
        (if (i32.ge_s (local.get $prev) (i32.const 0)) (then
          (i32.store (i32.add (local.get $R2C) (i32.shl (local.get $prev) (i32.const 2))) (i32.const -1))
          (if (i32.and (f64.lt (local.get $u1) (local.get $u2)) (i32.gt_s (local.get $budget) (i32.const 0)))
            (then
              (local.set $budget (i32.sub (local.get $budget) (i32.const 1)))
              (local.set $k (i32.sub (local.get $k) (i32.const 1)))
              (i32.store (i32.add (local.get $F) (i32.shl (local.get $k) (i32.const 2))) (local.get $prev)))
            (else
              (i32.store (i32.add (local.get $NX) (i32.shl (local.get $nNext) (i32.const 2))) (local.get $prev))
              (local.set $nNext (i32.add (local.get $nNext) (i32.const 1)))))))
        (br $rl)))
      (local.set $p (local.get $F))
      (local.set $F (local.get $NX))
      (local.set $NX (local.get $p))
      (local.set $nFree (local.get $nNext))
      (local.set $pass (i32.add (local.get $pass) (i32.const 1)))
      (br $pl)))
    ;; the free rows are in F; SC (the settled columns) must not overlap them. Too many
    ;; rows left free means long searches for each (costs like c_ij = i·j): give up.
    (if (i32.gt_u (local.get $nFree) (local.get $maxFree)) (then (return (i32.const -3))))
    (local.set $SC (local.get $NX))

    ;; ---- one shortest augmenting path per free row (in $search: a function called
    ;; once per row, so the engine can optimise it while the first solve runs)
    (global.set $gC (local.get $C))
    (global.set $gV (local.get $V))
    (global.set $gU (local.get $U))
    (global.set $gR2C (local.get $R2C))
    (global.set $gC2R (local.get $C2R))
    (global.set $gD (local.get $D))
    (global.set $gVW (local.get $VW))
    (global.set $gDS (local.get $DS))
    (global.set $gSC (local.get $SC))
    (global.set $gRL (local.get $RL))
    (global.set $gOFF (local.get $OFF))
    (global.set $gFREE (local.get $FREE))
    (global.set $gnp (local.get $np))
    (global.set $gRowBytes (local.get $rowBytes))
    (global.set $gMaxScan (local.get $maxScan))
    (local.set $nf (i32.const 0))
    (local.set $j (i32.const 0))
    (block $d (loop $l
      (br_if $d (i32.ge_u (local.get $j) (local.get $n)))
      (if (i32.lt_s (i32.load (i32.add (local.get $C2R) (i32.shl (local.get $j) (i32.const 2)))) (i32.const 0)) (then
        (i32.store (i32.add (local.get $FREE) (i32.shl (local.get $nf) (i32.const 2))) (local.get $j))
        (local.set $nf (i32.add (local.get $nf) (i32.const 1)))))
      (local.set $j (i32.add (local.get $j) (i32.const 1)))
      (br $l)))
    (global.set $gnf (local.get $nf))
    (local.set $f (i32.const 0))
    (block $searchesDone (loop $sl
      (br_if $searchesDone (i32.ge_u (local.get $f) (local.get $nFree)))
      (local.set $k (call $search (i32.load (i32.add (local.get $F) (i32.shl (local.get $f) (i32.const 2))))))
      (if (i32.lt_s (local.get $k) (i32.const 0)) (then (return (local.get $k))))
      (local.set $f (i32.add (local.get $f) (i32.const 1)))
      (br $sl)))
    (local.get $nFree))

  ;; The arrays of the searches, set by $solve.
  (global $gC (mut i32) (i32.const 0))
  (global $gV (mut i32) (i32.const 0))
  (global $gU (mut i32) (i32.const 0))
  (global $gR2C (mut i32) (i32.const 0))
  (global $gC2R (mut i32) (i32.const 0))
  (global $gD (mut i32) (i32.const 0))
  (global $gVW (mut i32) (i32.const 0))
  (global $gDS (mut i32) (i32.const 0))
  (global $gSC (mut i32) (i32.const 0))
  (global $gRL (mut i32) (i32.const 0))
  (global $gOFF (mut i32) (i32.const 0))
  (global $gFREE (mut i32) (i32.const 0))
  (global $gnf (mut i32) (i32.const 0))
  (global $gnp (mut i32) (i32.const 0))
  (global $gRowBytes (mut i32) (i32.const 0))
  (global $gMaxScan (mut f64) (f64.const 0))

  ;; One shortest augmenting path from free row r0 (Dijkstra over whole rows, see
  ;; $relax), then the prices and the assignment along the path. Returns 0, or -2 / -3
  ;; / -4 as $solve.
  (func $search (param $r0 i32) (result i32)
    (local $C i32) (local $V i32) (local $U i32) (local $R2C i32) (local $C2R i32) (local $D i32) (local $VW i32)
    (local $DS i32) (local $SC i32) (local $RL i32) (local $OFF i32) (local $FREE i32) (local $nf i32) (local $np i32)
    (local $rowBytes i32) (local $i i32) (local $j i32) (local $k i32) (local $t i32) (local $p i32) (local $nDone i32)
    (local $sink i32) (local $prevCol i32) (local $base f64) (local $ui f64) (local $off f64) (local $best f64)
    (local $dj f64) (local $d f64)
    (local.set $C (global.get $gC))
    (local.set $V (global.get $gV))
    (local.set $U (global.get $gU))
    (local.set $R2C (global.get $gR2C))
    (local.set $C2R (global.get $gC2R))
    (local.set $D (global.get $gD))
    (local.set $VW (global.get $gVW))
    (local.set $DS (global.get $gDS))
    (local.set $SC (global.get $gSC))
    (local.set $RL (global.get $gRL))
    (local.set $OFF (global.get $gOFF))
    (local.set $FREE (global.get $gFREE))
    (local.set $nf (global.get $gnf))
    (local.set $np (global.get $gnp))
    (local.set $rowBytes (global.get $gRowBytes))
    (call $fill (local.get $D) (local.get $np) (f64.const inf))
    (memory.copy (local.get $VW) (local.get $V) (i32.shl (local.get $np) (i32.const 3)))
    (local.set $i (local.get $r0))
    (block $found (loop $step
      (local.set $off (f64.sub (local.get $base) (local.get $ui)))
      (i32.store (i32.add (local.get $RL) (i32.shl (local.get $nDone) (i32.const 2))) (local.get $i))
      (f64.store (i32.add (local.get $OFF) (i32.shl (local.get $nDone) (i32.const 3))) (local.get $off))
      (local.set $best (call $relax (i32.add (local.get $C) (i32.mul (local.get $i) (local.get $rowBytes)))
        (local.get $VW) (local.get $D) (local.get $np) (local.get $off)))
      (global.set $scanned (f64.add (global.get $scanned) (f64.convert_i32_u (local.get $np))))
      (if (f64.gt (global.get $scanned) (global.get $gMaxScan)) (then (return (i32.const -3))))
      (if (i32.eqz (f64.lt (local.get $best) (f64.const inf))) (then (return (i32.const -2))))
      ;; the first column of the block at the lowest distance
      (local.set $p (global.get $j1))
      (block $at (loop $find
        (br_if $at (f64.eq (f64.load (local.get $p)) (local.get $best)))
        (local.set $p (i32.add (local.get $p) (i32.const 8)))
        (br $find)))
      (local.set $j (i32.shr_u (i32.sub (local.get $p) (local.get $D)) (i32.const 3)))
      ;; on a tie prefer a free column: it ends the search
      (if (i32.ge_s (i32.load (i32.add (local.get $C2R) (i32.shl (local.get $j) (i32.const 2)))) (i32.const 0)) (then
        (local.set $t (i32.const 0))
        (block $fd (loop $fl
          (br_if $fd (i32.ge_u (local.get $t) (local.get $nf)))
          (local.set $k (i32.load (i32.add (local.get $FREE) (i32.shl (local.get $t) (i32.const 2)))))
          (if (f64.eq (f64.load (i32.add (local.get $D) (i32.shl (local.get $k) (i32.const 3)))) (local.get $best)) (then
            (local.set $j (local.get $k))
            (br $fd)))
          (local.set $t (i32.add (local.get $t) (i32.const 1)))
          (br $fl)))))
      (if (i32.lt_s (i32.load (i32.add (local.get $C2R) (i32.shl (local.get $j) (i32.const 2)))) (i32.const 0)) (then
        (local.set $sink (local.get $j))
        (br $found)))
      ;; settle column j: its distance is final; it is never lowered or picked again
      (i32.store (i32.add (local.get $SC) (i32.shl (local.get $nDone) (i32.const 2))) (local.get $j))
      (f64.store (i32.add (local.get $DS) (i32.shl (local.get $j) (i32.const 3))) (local.get $best))
      (f64.store (i32.add (local.get $D) (i32.shl (local.get $j) (i32.const 3))) (f64.const inf))
      (f64.store (i32.add (local.get $VW) (i32.shl (local.get $j) (i32.const 3))) (f64.const -inf))
      (local.set $nDone (i32.add (local.get $nDone) (i32.const 1)))
      (local.set $i (i32.load (i32.add (local.get $C2R) (i32.shl (local.get $j) (i32.const 2)))))
      (local.set $base (local.get $best))
      (local.set $ui (f64.load (i32.add (local.get $U) (i32.shl (local.get $i) (i32.const 3)))))
      (br $step)))
    ;; ---- the path back from the sink: a column's predecessor is the first row relaxed
    ;; (in order) whose reduced cost, computed as in $relax, gives the column's distance
    ;; exactly; that row was relaxed before the column settled, so the path shortens.
    (local.set $j (local.get $sink))
    (local.set $dj (local.get $best))
    (block $pathDone (loop $pl
      (local.set $t (i32.const 0))
      (block $hit (loop $tl
        (if (i32.gt_u (local.get $t) (local.get $nDone)) (then (return (i32.const -4))))
        (br_if $hit (f64.eq
          (f64.sub
            (f64.add (f64.load (i32.add (local.get $OFF) (i32.shl (local.get $t) (i32.const 3))))
              (f64.load (i32.add
                (i32.add (local.get $C) (i32.mul (i32.load (i32.add (local.get $RL) (i32.shl (local.get $t) (i32.const 2)))) (local.get $rowBytes)))
                (i32.shl (local.get $j) (i32.const 3)))))
            (f64.load (i32.add (local.get $V) (i32.shl (local.get $j) (i32.const 3)))))
          (local.get $dj)))
        (local.set $t (i32.add (local.get $t) (i32.const 1)))
        (br $tl)))
      (local.set $k (i32.load (i32.add (local.get $RL) (i32.shl (local.get $t) (i32.const 2)))))
      (local.set $prevCol (select (i32.const -1)
        (i32.load (i32.add (local.get $R2C) (i32.shl (local.get $k) (i32.const 2))))
        (i32.eqz (local.get $t))))
      (i32.store (i32.add (local.get $R2C) (i32.shl (local.get $k) (i32.const 2))) (local.get $j))
      (i32.store (i32.add (local.get $C2R) (i32.shl (local.get $j) (i32.const 2))) (local.get $k))
      (br_if $pathDone (i32.lt_s (local.get $prevCol) (i32.const 0)))
      (local.set $j (local.get $prevCol))
      (local.set $dj (f64.load (i32.add (local.get $DS) (i32.shl (local.get $j) (i32.const 3)))))
      (br $pl)))
    ;; ---- prices: every settled column (and the row that held it) moves by minVal - dist
    (local.set $t (i32.const 0))
    (block $ud (loop $ul
      (br_if $ud (i32.ge_u (local.get $t) (local.get $nDone)))
      (local.set $j (i32.load (i32.add (local.get $SC) (i32.shl (local.get $t) (i32.const 2)))))
      (local.set $d (f64.sub (local.get $best) (f64.load (i32.add (local.get $DS) (i32.shl (local.get $j) (i32.const 3))))))
      (local.set $p (i32.add (local.get $V) (i32.shl (local.get $j) (i32.const 3))))
      (f64.store (local.get $p) (f64.sub (f64.load (local.get $p)) (local.get $d)))
      (local.set $p (i32.add (local.get $U) (i32.shl
        (i32.load (i32.add (local.get $RL) (i32.shl (i32.add (local.get $t) (i32.const 1)) (i32.const 2)))) (i32.const 3))))
      (f64.store (local.get $p) (f64.add (f64.load (local.get $p)) (local.get $d)))
      (local.set $t (i32.add (local.get $t) (i32.const 1)))
      (br $ul)))
    (f64.store (i32.add (local.get $U) (i32.shl (local.get $r0) (i32.const 3))) (local.get $best))
    ;; the sink is taken: off the free list
    (local.set $t (i32.const 0))
    (block $rd (loop $rl
      (br_if $rd (i32.ge_u (local.get $t) (local.get $nf)))
      (if (i32.eq (i32.load (i32.add (local.get $FREE) (i32.shl (local.get $t) (i32.const 2)))) (local.get $sink)) (then
        (local.set $nf (i32.sub (local.get $nf) (i32.const 1)))
        (i32.store (i32.add (local.get $FREE) (i32.shl (local.get $t) (i32.const 2)))
          (i32.load (i32.add (local.get $FREE) (i32.shl (local.get $nf) (i32.const 2)))))
        (br $rd)))
      (local.set $t (i32.add (local.get $t) (i32.const 1)))
      (br $rl)))
    (global.set $gnf (local.get $nf))
    (i32.const 0))
)
