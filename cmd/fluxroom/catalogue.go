package main

import (
	"context"
	"fmt"
	"strings"

	"example.com/fluxroom/domain"
)

// catalogueCmd prints every diagnosis code with its level, factor, cause and
// suggested action: the list instructors read to know what fluxroom looks for.
func (m *Main) catalogueCmd(ctx context.Context, args []string) error {
	fs := m.newFlags("catalogue")
	if err := parse(fs, args); err != nil {
		return err
	}
	for _, e := range domain.Catalogue() {
		factor := ""
		if e.Factor != 0 {
			factor = fmt.Sprintf(" ×%.4g", e.Factor)
		}
		fmt.Fprintf(m.Stdout, "%s  [%s%s]\n    %s\n    → %s\n", e.Code, e.Level, factor, e.Cause, e.Action)
		if len(e.Lookalikes) > 0 {
			fmt.Fprintf(m.Stdout, "    look-alikes: %s\n", strings.Join(e.Lookalikes, ", "))
		}
	}
	return nil
}
