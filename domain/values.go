package domain

import (
	"encoding/json"
	"slices"
	"strings"
)

// Values are a reading's quantities by name, as typed. A reading holds two
// to five, and a room keeps every reading of its benches in memory: a
// sorted slice takes a quarter of a small map's memory (119 bytes against
// 464 for two values, measured with Go 1.26) and is looked up as fast.
type Values []NamedQuantity

// NamedQuantity is one value of a reading with its name.
type NamedQuantity struct {
	Name string
	Quantity
}

// ValuesOf makes Values from a map, sorted by name.
func ValuesOf(m map[string]Quantity) Values {
	v := make(Values, 0, len(m))
	for name, q := range m {
		v = append(v, NamedQuantity{name, q})
	}
	SortValues(v)
	return v
}

// SortValues puts values built in another order in order by name.
func SortValues(v Values) {
	slices.SortFunc(v, func(a, b NamedQuantity) int { return strings.Compare(a.Name, b.Name) })
}

// QuantityMessage is a quantity as an encoded message holds it: the wire's
// and the stored record's both have these getters.
type QuantityMessage interface {
	GetValue() float64
	GetUnit() string
	GetUncertainty() float64
}

// ValuesFrom makes Values from a map of quantity messages, sorted by name.
func ValuesFrom[Q QuantityMessage](m map[string]Q) Values {
	v := make(Values, 0, len(m))
	for name, q := range m {
		v = append(v, NamedQuantity{name, QuantityOf(q)})
	}
	SortValues(v)
	return v
}

// QuantitiesFrom makes a map of quantities (a bench's constants) from a map
// of quantity messages.
func QuantitiesFrom[Q QuantityMessage](m map[string]Q) map[string]Quantity {
	out := make(map[string]Quantity, len(m))
	for name, q := range m {
		out[name] = QuantityOf(q)
	}
	return out
}

// QuantityOf is a quantity message's quantity.
func QuantityOf[Q QuantityMessage](q Q) Quantity {
	return Quantity{Value: q.GetValue(), Unit: q.GetUnit(), Uncertainty: q.GetUncertainty()}
}

// QuantitiesTo is a map of quantities as a map of what to makes of each:
// the wire's or the stored record's quantity message.
func QuantitiesTo[Q any](m map[string]Quantity, to func(Quantity) Q) map[string]Q {
	out := make(map[string]Q, len(m))
	for name, q := range m {
		out[name] = to(q)
	}
	return out
}

// ValuesTo is QuantitiesTo for a reading's values.
func ValuesTo[Q any](v Values, to func(Quantity) Q) map[string]Q {
	out := make(map[string]Q, len(v))
	for _, nq := range v {
		out[nq.Name] = to(nq.Quantity)
	}
	return out
}

// Get returns the value of the given name.
func (v Values) Get(name string) (Quantity, bool) {
	for _, nq := range v {
		if nq.Name == name {
			return nq.Quantity, true
		}
	}
	return Quantity{}, false
}

// Map returns the values as a new map.
func (v Values) Map() map[string]Quantity {
	return ValuesTo(v, func(q Quantity) Quantity { return q })
}

// Equal reports whether both hold the same names with the same values.
func (v Values) Equal(o Values) bool {
	if len(v) != len(o) {
		return false
	}
	for _, nq := range v {
		if q, ok := o.Get(nq.Name); !ok || q != nq.Quantity {
			return false
		}
	}
	return true
}

// MarshalJSON writes the values as one object by name, as a map would be.
func (v Values) MarshalJSON() ([]byte, error) { return json.Marshal(v.Map()) }

// UnmarshalJSON reads an object by name.
func (v *Values) UnmarshalJSON(b []byte) error {
	var m map[string]Quantity
	if err := json.Unmarshal(b, &m); err != nil {
		return err
	}
	*v = ValuesOf(m)
	return nil
}

// Set gives a name its value, in its place by name.
func (v *Values) Set(name string, q Quantity) {
	i, found := slices.BinarySearchFunc(*v, name, func(nq NamedQuantity, name string) int { return strings.Compare(nq.Name, name) })
	if found {
		(*v)[i].Quantity = q
		return
	}
	*v = slices.Insert(*v, i, NamedQuantity{name, q})
}

// At is the value of the given name, the zero Quantity when there is none.
func (v Values) At(name string) Quantity {
	q, _ := v.Get(name)
	return q
}
