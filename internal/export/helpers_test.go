package export

import (
	"errors"

	"example.com/fluxroom/domain"
)

func asValidation(err error, ve **domain.ValidationError) bool { return errors.As(err, ve) }

// goldenName maps an export's suggested file name to its golden file.
func goldenName(name string) string {
	if name == "fluxroom-session-1.json" {
		return "session.json"
	}
	return name[len("fluxroom-session-1-"):]
}
