;; The tight loop of a pricing pass (src/hindsight/pricing.ts, Pricer.scan), run in
;; WebAssembly over a pair store that lives in this module's (shared) memory. It reads
;; one row's pairs from index $e and stops at the first pair the full handling in
;; JavaScript must see, or at $end; it does what the JavaScript loop does, operation
;; for operation in the same order, so its numbers are the same to the last bit.
;;
;; Per pair: a candidate or a pair of P or more (code ≥ $top) is passed over; a pair
;; whose lo − v reaches $bar is clean and only lowers the row's floor ($least); a
;; violator is counted when its reduced cost is deep ($red < $deep), below neither its
;; column's few (count and red of the column picks) nor the row's ($rowCut); any other
;; pair stops the loop. The row's floor and the violators counted are written to $out
;; (two f64: reading an exported global from JavaScript costs more than the memory).
(module
  (import "env" "memory" (memory 1 65536 shared))
  ;; $codes: u8 per pair; $cols: u16 per pair (column less the row's $base); $duals: f64
  ;; per column; $count: i32 per column, $red: f64 × $perCol per column (the column picks);
  ;; $out: the row's floor (it starts at $least) and the violators counted, as f64.
  ;; Returns the pair it stopped at ($end when none).
  (func (export "clear")
    (param $codes i32) (param $cols i32) (param $duals i32) (param $count i32) (param $red i32) (param $perCol i32) (param $out i32)
    (param $e i32) (param $end i32) (param $base i32) (param $top i32)
    (param $step f64) (param $u f64) (param $bar f64) (param $deep f64) (param $rowCut f64) (param $least f64)
    (result i32)
    (local $code i32) (local $col i32) (local $lo f64) (local $v f64) (local $t f64) (local $r f64) (local $viol i32) (local $k i32)
    (block $stop
      (loop $next
        (br_if $stop (i32.ge_u (local.get $e) (local.get $end)))
        (local.set $code (i32.load8_u (i32.add (local.get $codes) (local.get $e))))
        (if (i32.lt_u (local.get $code) (local.get $top))
          (then
            (local.set $col (i32.add (local.get $base)
              (i32.load16_u (i32.add (local.get $cols) (i32.shl (local.get $e) (i32.const 1))))))
            (local.set $lo (f64.mul (f64.convert_i32_u (local.get $code)) (local.get $step)))
            (local.set $v (f64.load (i32.add (local.get $duals) (i32.shl (local.get $col) (i32.const 3)))))
            (local.set $t (f64.sub (local.get $lo) (local.get $v)))
            (if (f64.ge (local.get $t) (local.get $bar))
              (then
                (if (f64.lt (local.get $t) (local.get $least)) (then (local.set $least (local.get $t)))))
              (else
                (local.set $r (f64.sub (f64.sub (local.get $lo) (local.get $u)) (local.get $v)))
                (br_if $stop (f64.ge (local.get $r) (local.get $deep)))
                (if (i32.gt_s (local.get $perCol) (i32.const 0))
                  (then
                    (local.set $k (i32.load (i32.add (local.get $count) (i32.shl (local.get $col) (i32.const 2)))))
                    (br_if $stop (i32.lt_s (local.get $k) (local.get $perCol)))
                    (br_if $stop (f64.lt (local.get $r)
                      (f64.load (i32.add (local.get $red)
                        (i32.shl (i32.sub (i32.mul (i32.add (local.get $col) (i32.const 1)) (local.get $perCol)) (i32.const 1)) (i32.const 3))))))))
                (br_if $stop (f64.lt (local.get $r) (local.get $rowCut)))
                (local.set $viol (i32.add (local.get $viol) (i32.const 1)))))))
        (local.set $e (i32.add (local.get $e) (i32.const 1)))
        (br $next)))
    (f64.store (local.get $out) (local.get $least))
    (f64.store offset=8 (local.get $out) (f64.convert_i32_u (local.get $viol)))
    (local.get $e)))
