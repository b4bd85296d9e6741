package input

import (
	"math"
	"strconv"
)

// pow10 holds the powers of ten that are exact in a float64.
var pow10 = [...]float64{
	1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10,
	1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
}

// parseNumber parses a trimmed cell as a float64 with the result of
// strconv.ParseFloat(s, 64); with decComma a ',' may stand for the decimal
// point. It returns the strconv error unchanged (ErrSyntax or ErrRange).
func parseNumber(b []byte, decComma bool) (float64, error) {
	if f, ok := parseFast(b, decComma); ok {
		return f, nil
	}
	if decComma {
		var tmp [64]byte
		if len(b) <= len(tmp) {
			c := tmp[:len(b)]
			copy(c, b)
			for i, x := range c {
				if x == ',' {
					c[i] = '.'
				}
			}
			b = c
		} else {
			c := make([]byte, len(b))
			for i, x := range b {
				if x == ',' {
					x = '.'
				}
				c[i] = x
			}
			b = c
		}
	}
	f, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		return f, err.(*strconv.NumError).Err
	}
	return f, nil
}

// parseFast parses plain decimals ([sign] digits [. digits] [e [sign]
// digits]) whose significant digits fit in 2^53 and whose decimal exponent
// is within ±22. Such a number is the product or quotient of two exactly
// representable values, so one rounding gives the correctly rounded result,
// the same as strconv.ParseFloat. Anything else reports ok == false.
func parseFast(b []byte, decComma bool) (f float64, ok bool) {
	i := 0
	neg := false
	if i < len(b) && (b[i] == '+' || b[i] == '-') {
		neg = b[i] == '-'
		i++
	}
	var mant uint64
	nd, exp := 0, 0
	digits, dot := false, false
	for ; i < len(b); i++ {
		c := b[i]
		if c >= '0' && c <= '9' {
			digits = true
			if dot {
				exp--
			}
			if mant == 0 && c == '0' {
				continue // a leading zero carries no significance
			}
			if nd == 19 {
				return 0, false // could overflow the uint64
			}
			mant = mant*10 + uint64(c-'0')
			nd++
			continue
		}
		if !dot && (c == '.' || (decComma && c == ',')) {
			dot = true
			continue
		}
		break
	}
	if !digits {
		return 0, false
	}
	if i < len(b) && (b[i] == 'e' || b[i] == 'E') {
		i++
		eneg := false
		if i < len(b) && (b[i] == '+' || b[i] == '-') {
			eneg = b[i] == '-'
			i++
		}
		start := i
		e := 0
		for ; i < len(b) && b[i] >= '0' && b[i] <= '9'; i++ {
			if e < 10000 {
				e = e*10 + int(b[i]-'0')
			}
		}
		if i == start {
			return 0, false
		}
		if eneg {
			e = -e
		}
		exp += e
	}
	if i != len(b) {
		return 0, false
	}
	switch {
	case mant == 0:
		f = 0
	case mant > 1<<53:
		return 0, false
	case exp == 0:
		f = float64(mant)
	case exp > 0 && exp < len(pow10):
		f = float64(mant) * pow10[exp]
	case exp < 0 && -exp < len(pow10):
		f = float64(mant) / pow10[-exp]
	default:
		return 0, false
	}
	if neg {
		f = math.Copysign(f, -1)
	}
	return f, true
}
