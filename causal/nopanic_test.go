package causal

import (
	"reflect"
	"testing"
)

// Every exported method of every result type, called on a nil pointer and on
// a zero value with zero arguments, must return (an error value or a text
// saying what is missing) rather than panic: nothing panics from the public API.
func TestNoPanicOnNilAndZeroResults(t *testing.T) {
	values := []any{
		(*Study)(nil), &Study{}, (*Scores)(nil), &Scores{}, (*Support)(nil), &Support{}, (*Cells)(nil), &Cells{},
		(*Erosion)(nil), &Erosion{}, (*BalanceSheet)(nil), &BalanceSheet{}, (*Verdict)(nil), &Verdict{},
		(*Weights)(nil), &Weights{}, (*Trimmed)(nil), &Trimmed{}, (*Effect)(nil), &Effect{}, (*Estimates)(nil), &Estimates{},
		(*Bootstrap)(nil), &Bootstrap{}, (*Sweep)(nil), &Sweep{}, (*ExtrapolationAudit)(nil), &ExtrapolationAudit{},
		(*ExtrapolationCurve)(nil), &ExtrapolationCurve{}, (*Report)(nil), &Report{}, (*Design)(nil), &Design{},
		(*Frame)(nil), &Frame{}, (*EValue)(nil), &EValue{},
		(*Matching)(nil), &Matching{}, (*Strata)(nil), &Strata{},
	}
	for _, v := range values {
		rv := reflect.ValueOf(v)
		rt := rv.Type()
		for m := 0; m < rt.NumMethod(); m++ {
			meth := rt.Method(m)
			args := []reflect.Value{rv}
			for a := 1; a < meth.Type.NumIn(); a++ {
				in := meth.Type.In(a)
				if meth.Type.IsVariadic() && a == meth.Type.NumIn()-1 {
					break
				}
				args = append(args, reflect.Zero(in))
			}
			func() {
				defer func() {
					if r := recover(); r != nil {
						nilness := "zero"
						if rv.IsNil() {
							nilness = "nil"
						}
						t.Errorf("%s %T.%s panics: %v", nilness, v, meth.Name, r)
					}
				}()
				meth.Func.Call(args)
			}()
		}
	}
}
