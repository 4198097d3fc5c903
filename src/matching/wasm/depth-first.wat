;; The depth-first passes of a maximum-cardinality matching (src/matching/
;; cardinality.ts, depthFirstPasses), run in WebAssembly: one search from a free row
;; a call ($search; the caller runs the passes and the roots in their order, so that
;; V8 runs the searches in optimised code: a call that is running never switches
;; to it), the same steps, so the same matching comes out. Columns are 16-bit offsets
;; from each row's base ($colIdx u16, $rowBase i32; the hindsight's compact graph as
;; it lies in its store), $rowPtr i32 (nRows + 1); the matching $rowToCol, $colToRow
;; (i32, -1 for none); working arrays $look, $next, $stack, $via (i32 a row) and
;; $seen (i32 a column, zeros at the start). Returns 1 when the search augmented.
(module
  (import "env" "memory" (memory 1 65536 shared))

  (func (export "search")
    (param $root i32) (param $pass i32) (param $forward i32)
    (param $rowPtr i32) (param $rowBase i32) (param $colIdx i32)
    (param $rowToCol i32) (param $colToRow i32)
    (param $look i32) (param $next i32) (param $stack i32) (param $via i32) (param $seen i32)
    (result i32)
    (local $found i32) (local $sp i32)
    (local $r i32) (local $end i32) (local $base i32) (local $e i32) (local $free i32) (local $c i32) (local $i i32)
    (local $child i32) (local $f i32) (local $start i32) (local $at i32)
    (local.set $sp (i32.const 1))
    (i32.store (local.get $stack) (local.get $root))
    (i32.store (i32.add (local.get $next) (i32.shl (local.get $root) (i32.const 2)))
      (select
        (i32.load (i32.add (local.get $rowPtr) (i32.shl (local.get $root) (i32.const 2))))
        (i32.sub (i32.load offset=4 (i32.add (local.get $rowPtr) (i32.shl (local.get $root) (i32.const 2)))) (i32.const 1))
        (local.get $forward)))
    (block $searchDone
      (loop $step
        (br_if $searchDone (i32.le_s (local.get $sp) (i32.const 0)))
        (local.set $r (i32.load (i32.add (local.get $stack) (i32.shl (i32.sub (local.get $sp) (i32.const 1)) (i32.const 2)))))
        (local.set $end (i32.load offset=4 (i32.add (local.get $rowPtr) (i32.shl (local.get $r) (i32.const 2)))))
        (local.set $base (i32.load (i32.add (local.get $rowBase) (i32.shl (local.get $r) (i32.const 2)))))
        ;; Lookahead: a free column of r ends the path at once.
        (local.set $e (i32.load (i32.add (local.get $look) (i32.shl (local.get $r) (i32.const 2)))))
        (local.set $free (i32.const -1))
        (block $looked
          (loop $ahead
            (br_if $looked (i32.ge_s (local.get $e) (local.get $end)))
            (local.set $c (i32.add (local.get $base)
              (i32.load16_u (i32.add (local.get $colIdx) (i32.shl (local.get $e) (i32.const 1))))))
            (local.set $e (i32.add (local.get $e) (i32.const 1)))
            (if (i32.eq (i32.load (i32.add (local.get $colToRow) (i32.shl (local.get $c) (i32.const 2)))) (i32.const -1))
              (then
                (local.set $free (local.get $c))
                (br $looked)))
            (br $ahead)))
        (i32.store (i32.add (local.get $look) (i32.shl (local.get $r) (i32.const 2))) (local.get $e))
        (if (i32.ge_s (local.get $free) (i32.const 0))
          (then
            (local.set $i (i32.const 0))
            (block $shifted
              (loop $shift
                (br_if $shifted (i32.ge_s (local.get $i) (i32.sub (local.get $sp) (i32.const 1))))
                (local.set $at (i32.load (i32.add (local.get $stack) (i32.shl (local.get $i) (i32.const 2)))))
                (local.set $c (i32.load (i32.add (local.get $via) (i32.shl (local.get $i) (i32.const 2)))))
                (i32.store (i32.add (local.get $rowToCol) (i32.shl (local.get $at) (i32.const 2))) (local.get $c))
                (i32.store (i32.add (local.get $colToRow) (i32.shl (local.get $c) (i32.const 2))) (local.get $at))
                (local.set $i (i32.add (local.get $i) (i32.const 1)))
                (br $shift)))
            (i32.store (i32.add (local.get $rowToCol) (i32.shl (local.get $r) (i32.const 2))) (local.get $free))
            (i32.store (i32.add (local.get $colToRow) (i32.shl (local.get $free) (i32.const 2))) (local.get $r))
            (local.set $found (i32.add (local.get $found) (i32.const 1)))
            (br $searchDone)))
        ;; Every column of r is matched: go on through the next one not yet visited.
        (local.set $child (i32.const -1))
        (local.set $f (i32.load (i32.add (local.get $next) (i32.shl (local.get $r) (i32.const 2)))))
        (if (local.get $forward)
          (then
            (block $picked
              (loop $scan
                (br_if $picked (i32.ge_s (local.get $f) (local.get $end)))
                (local.set $c (i32.add (local.get $base)
                  (i32.load16_u (i32.add (local.get $colIdx) (i32.shl (local.get $f) (i32.const 1))))))
                (local.set $at (i32.add (local.get $seen) (i32.shl (local.get $c) (i32.const 2))))
                (if (i32.ne (i32.load (local.get $at)) (local.get $pass))
                  (then
                    (i32.store (local.get $at) (local.get $pass))
                    (i32.store (i32.add (local.get $next) (i32.shl (local.get $r) (i32.const 2))) (i32.add (local.get $f) (i32.const 1)))
                    (i32.store (i32.add (local.get $via) (i32.shl (i32.sub (local.get $sp) (i32.const 1)) (i32.const 2))) (local.get $c))
                    (local.set $child (i32.load (i32.add (local.get $colToRow) (i32.shl (local.get $c) (i32.const 2)))))
                    (br $picked)))
                (local.set $f (i32.add (local.get $f) (i32.const 1)))
                (br $scan))))
          (else
            (local.set $start (i32.load (i32.add (local.get $rowPtr) (i32.shl (local.get $r) (i32.const 2)))))
            (block $picked
              (loop $scan
                (br_if $picked (i32.lt_s (local.get $f) (local.get $start)))
                (local.set $c (i32.add (local.get $base)
                  (i32.load16_u (i32.add (local.get $colIdx) (i32.shl (local.get $f) (i32.const 1))))))
                (local.set $at (i32.add (local.get $seen) (i32.shl (local.get $c) (i32.const 2))))
                (if (i32.ne (i32.load (local.get $at)) (local.get $pass))
                  (then
                    (i32.store (local.get $at) (local.get $pass))
                    (i32.store (i32.add (local.get $next) (i32.shl (local.get $r) (i32.const 2))) (i32.sub (local.get $f) (i32.const 1)))
                    (i32.store (i32.add (local.get $via) (i32.shl (i32.sub (local.get $sp) (i32.const 1)) (i32.const 2))) (local.get $c))
                    (local.set $child (i32.load (i32.add (local.get $colToRow) (i32.shl (local.get $c) (i32.const 2)))))
                    (br $picked)))
                (local.set $f (i32.sub (local.get $f) (i32.const 1)))
                (br $scan)))))
        (if (i32.lt_s (local.get $child) (i32.const 0))
          (then
            (local.set $sp (i32.sub (local.get $sp) (i32.const 1)))
            (br $step)))
        (i32.store (i32.add (local.get $stack) (i32.shl (local.get $sp) (i32.const 2))) (local.get $child))
        (local.set $sp (i32.add (local.get $sp) (i32.const 1)))
        (i32.store (i32.add (local.get $next) (i32.shl (local.get $child) (i32.const 2)))
          (select
            (i32.load (i32.add (local.get $rowPtr) (i32.shl (local.get $child) (i32.const 2))))
            (i32.sub (i32.load offset=4 (i32.add (local.get $rowPtr) (i32.shl (local.get $child) (i32.const 2)))) (i32.const 1))
            (local.get $forward)))
        (br $step)))
    (local.get $found)))
