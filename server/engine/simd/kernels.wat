;; SIMD kernels for the float32 separation objective (server/engine/fit/model.ts): the element-wise passes over
;; the padded grid, four float32 lanes at a time. Built into kernels-binary.ts by scripts/build-kernels.ts
;; (npm run build:kernels); tests/engine/simd/kernels.test.ts checks the committed binary against this source.
;;
;; Every pointer is a byte offset into the imported memory, 16-byte aligned; every length is a count of
;; elements and a multiple of 4 (the float32 grids are Pw·Ph with Pw a multiple of 32, fft/real-fft-2d-float32.ts).
;; Sums are accumulated in float64, two lanes at a time.
(module
  (import "env" "memory" (memory 1))

  ;; s[i] = exp(s[i]) · scale (in place), total[i] = s[i] + u[i]; returns Σ total.
  ;; exp of four lanes by the usual single-precision method: k = round(x / ln 2), r = x − k ln 2 with ln 2 split
  ;; into 0.693359375 + (−2.12194440e−4) (Cody–Waite), exp r ≈ 1 + r + r² P(r) with P of degree 5, 2^k built in
  ;; the exponent bits. The coefficients are those of the Cephes library's expf (from memory of its source; the
  ;; test measures the error against Math.exp). x is clamped to [−87, 88], where 2^k stays a normal float32
  ;; (pmin/pmax: plain min/max instructions, where min/max would spend several on NaN rules), and k is rounded
  ;; by adding and subtracting 1.5·2^23.
  ;; `scale` = exp(μ) rounded once, so μ is not added in float32 (at |μ| ≈ 10 that would cost 1e−6 relative).
  (func (export "expScaleAdd") (param $s i32) (param $u i32) (param $total i32) (param $n i32) (param $scale f32)
    (result f64)
    (local $end i32) (local $x v128) (local $kb v128) (local $k v128) (local $r v128) (local $p v128) (local $t v128)
    (local $scale4 v128) (local $acc0 v128) (local $acc1 v128)
    (local.set $scale4 (f32x4.splat (local.get $scale)))
    (local.set $end (i32.add (local.get $s) (i32.shl (local.get $n) (i32.const 2))))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $s) (local.get $end)))
        (local.set $x
          (f32x4.pmax
            (f32x4.pmin (v128.load (local.get $s)) (v128.const f32x4 88 88 88 88))
            (v128.const f32x4 -87 -87 -87 -87)))
        ;; x/ln 2 + 1.5·2^23 rounds to the nearest integer k and holds k in its low mantissa bits
        (local.set $kb
          (f32x4.add
            (f32x4.mul (local.get $x) (v128.const f32x4 1.44269504088896341 1.44269504088896341 1.44269504088896341 1.44269504088896341))
            (v128.const f32x4 12582912 12582912 12582912 12582912)))
        (local.set $k (f32x4.sub (local.get $kb) (v128.const f32x4 12582912 12582912 12582912 12582912)))
        (local.set $r
          (f32x4.sub
            (f32x4.sub (local.get $x)
              (f32x4.mul (local.get $k) (v128.const f32x4 0.693359375 0.693359375 0.693359375 0.693359375)))
            (f32x4.mul (local.get $k) (v128.const f32x4 -2.12194440e-4 -2.12194440e-4 -2.12194440e-4 -2.12194440e-4))))
        (local.set $p
          (f32x4.add
            (f32x4.mul (v128.const f32x4 1.9875691500e-4 1.9875691500e-4 1.9875691500e-4 1.9875691500e-4) (local.get $r))
            (v128.const f32x4 1.3981999507e-3 1.3981999507e-3 1.3981999507e-3 1.3981999507e-3)))
        (local.set $p
          (f32x4.add (f32x4.mul (local.get $p) (local.get $r))
            (v128.const f32x4 8.3334519073e-3 8.3334519073e-3 8.3334519073e-3 8.3334519073e-3)))
        (local.set $p
          (f32x4.add (f32x4.mul (local.get $p) (local.get $r))
            (v128.const f32x4 4.1665795894e-2 4.1665795894e-2 4.1665795894e-2 4.1665795894e-2)))
        (local.set $p
          (f32x4.add (f32x4.mul (local.get $p) (local.get $r))
            (v128.const f32x4 1.6666665459e-1 1.6666665459e-1 1.6666665459e-1 1.6666665459e-1)))
        (local.set $p
          (f32x4.add (f32x4.mul (local.get $p) (local.get $r))
            (v128.const f32x4 5.0000001201e-1 5.0000001201e-1 5.0000001201e-1 5.0000001201e-1)))
        (local.set $p
          (f32x4.add
            (f32x4.add (f32x4.mul (local.get $p) (f32x4.mul (local.get $r) (local.get $r))) (local.get $r))
            (v128.const f32x4 1 1 1 1)))
        ;; exp x = p · 2^k; then the scale
        (local.set $p
          (f32x4.mul
            (f32x4.mul (local.get $p)
              (i32x4.shl
                ;; k + 127 from the bits of kb (0x4B400000 + k), moved into the exponent field
                (i32x4.add (local.get $kb) (v128.const i32x4 -1262485377 -1262485377 -1262485377 -1262485377))
                (i32.const 23)))
            (local.get $scale4)))
        (v128.store (local.get $s) (local.get $p))
        (local.set $t (f32x4.add (local.get $p) (v128.load (local.get $u))))
        (v128.store (local.get $total) (local.get $t))
        (local.set $acc0 (f64x2.add (local.get $acc0) (f64x2.promote_low_f32x4 (local.get $t))))
        (local.set $acc1
          (f64x2.add (local.get $acc1)
            (f64x2.promote_low_f32x4
              (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $t) (local.get $t)))))
        (local.set $s (i32.add (local.get $s) (i32.const 16)))
        (local.set $u (i32.add (local.get $u) (i32.const 16)))
        (local.set $total (i32.add (local.get $total) (i32.const 16)))
        (br $next)))
    (local.set $acc0 (f64x2.add (local.get $acc0) (local.get $acc1)))
    (f64.add (f64x2.extract_lane 0 (local.get $acc0)) (f64x2.extract_lane 1 (local.get $acc0))))

  ;; out[i] = a[i] · b[i] (float64 product rounded to float32); returns Σ a·b of the unrounded products.
  (func (export "productSum") (param $a i32) (param $b i32) (param $out i32) (param $n i32) (result f64)
    (local $end i32) (local $va v128) (local $vb v128) (local $lo v128) (local $hi v128)
    (local $acc0 v128) (local $acc1 v128)
    (local.set $end (i32.add (local.get $a) (i32.shl (local.get $n) (i32.const 2))))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $a) (local.get $end)))
        (local.set $va (v128.load (local.get $a)))
        (local.set $vb (v128.load (local.get $b)))
        (local.set $lo (f64x2.mul (f64x2.promote_low_f32x4 (local.get $va)) (f64x2.promote_low_f32x4 (local.get $vb))))
        (local.set $hi
          (f64x2.mul
            (f64x2.promote_low_f32x4 (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $va) (local.get $va)))
            (f64x2.promote_low_f32x4 (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $vb) (local.get $vb)))))
        (v128.store (local.get $out)
          (i8x16.shuffle 0 1 2 3 4 5 6 7 16 17 18 19 20 21 22 23
            (f32x4.demote_f64x2_zero (local.get $lo)) (f32x4.demote_f64x2_zero (local.get $hi))))
        (local.set $acc0 (f64x2.add (local.get $acc0) (local.get $lo)))
        (local.set $acc1 (f64x2.add (local.get $acc1) (local.get $hi)))
        (local.set $a (i32.add (local.get $a) (i32.const 16)))
        (local.set $b (i32.add (local.get $b) (i32.const 16)))
        (local.set $out (i32.add (local.get $out) (i32.const 16)))
        (br $next)))
    (local.set $acc0 (f64x2.add (local.get $acc0) (local.get $acc1)))
    (f64.add (f64x2.extract_lane 0 (local.get $acc0)) (f64x2.extract_lane 1 (local.get $acc0))))

  ;; out[i] = A[i] · ξ[i] (A float32, ξ float64, the product rounded to float32); returns Σ ½ ξ².
  (func (export "amplitudeTimes") (param $amp i32) (param $xi i32) (param $out i32) (param $n i32) (result f64)
    (local $end i32) (local $va v128) (local $x0 v128) (local $x1 v128) (local $acc0 v128) (local $acc1 v128)
    (local.set $end (i32.add (local.get $amp) (i32.shl (local.get $n) (i32.const 2))))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $amp) (local.get $end)))
        (local.set $va (v128.load (local.get $amp)))
        (local.set $x0 (v128.load (local.get $xi)))
        (local.set $x1 (v128.load offset=16 (local.get $xi)))
        (v128.store (local.get $out)
          (i8x16.shuffle 0 1 2 3 4 5 6 7 16 17 18 19 20 21 22 23
            (f32x4.demote_f64x2_zero (f64x2.mul (f64x2.promote_low_f32x4 (local.get $va)) (local.get $x0)))
            (f32x4.demote_f64x2_zero
              (f64x2.mul
                (f64x2.promote_low_f32x4 (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $va) (local.get $va)))
                (local.get $x1)))))
        (local.set $acc0 (f64x2.add (local.get $acc0) (f64x2.mul (local.get $x0) (local.get $x0))))
        (local.set $acc1 (f64x2.add (local.get $acc1) (f64x2.mul (local.get $x1) (local.get $x1))))
        (local.set $amp (i32.add (local.get $amp) (i32.const 16)))
        (local.set $xi (i32.add (local.get $xi) (i32.const 32)))
        (local.set $out (i32.add (local.get $out) (i32.const 16)))
        (br $next)))
    (local.set $acc0 (f64x2.add (local.get $acc0) (local.get $acc1)))
    (f64.mul (f64.const 0.5)
      (f64.add (f64x2.extract_lane 0 (local.get $acc0)) (f64x2.extract_lane 1 (local.get $acc0)))))

  ;; g[i] = A[i] · g[i] + ξ[i] (A, g float32, ξ float64; computed in float64, rounded to float32).
  (func (export "amplitudeGradient") (param $amp i32) (param $g i32) (param $xi i32) (param $n i32)
    (local $end i32) (local $va v128) (local $vg v128)
    (local.set $end (i32.add (local.get $amp) (i32.shl (local.get $n) (i32.const 2))))
    (block $done
      (loop $next
        (br_if $done (i32.ge_u (local.get $amp) (local.get $end)))
        (local.set $va (v128.load (local.get $amp)))
        (local.set $vg (v128.load (local.get $g)))
        (v128.store (local.get $g)
          (i8x16.shuffle 0 1 2 3 4 5 6 7 16 17 18 19 20 21 22 23
            (f32x4.demote_f64x2_zero
              (f64x2.add
                (f64x2.mul (f64x2.promote_low_f32x4 (local.get $va)) (f64x2.promote_low_f32x4 (local.get $vg)))
                (v128.load (local.get $xi))))
            (f32x4.demote_f64x2_zero
              (f64x2.add
                (f64x2.mul
                  (f64x2.promote_low_f32x4 (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $va) (local.get $va)))
                  (f64x2.promote_low_f32x4 (i8x16.shuffle 8 9 10 11 12 13 14 15 0 1 2 3 4 5 6 7 (local.get $vg) (local.get $vg))))
                (v128.load offset=16 (local.get $xi))))))
        (local.set $amp (i32.add (local.get $amp) (i32.const 16)))
        (local.set $g (i32.add (local.get $g) (i32.const 16)))
        (local.set $xi (i32.add (local.get $xi) (i32.const 32)))
        (br $next))))
)
