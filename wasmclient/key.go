package wasmclient

import (
	"strings"

	"github.com/maxence-charriere/go-app/v9/pkg/app"
)

// storageKey keeps the staff key (or the administrator's) in this
// browser's local storage. Its name predates staff accounts; keeping it
// keeps browsers signed in across the upgrade.
const storageKey = "fluxroom.instructorKey"

// instructorKey returns the key: from a "#key=…" fragment (which the
// browser never sends to the server; it is then removed from the address
// bar), else from local storage.
func storedKey(ctx app.Context) string {
	u := app.Window().URL()
	if k, ok := strings.CutPrefix(u.Fragment, "key="); ok && k != "" {
		ctx.LocalStorage().Set(storageKey, k)
		u.Fragment = ""
		app.Window().Get("history").Call("replaceState", nil, "", u.String())
		return k
	}
	var k string
	ctx.LocalStorage().Get(storageKey, &k)
	return k
}

// KeyPrompt asks for a key when the server refused the one this browser
// has (or it has none).
type KeyPrompt struct {
	app.Compo
	key string
}

// Render draws the prompt.
func (p *KeyPrompt) Render() app.UI {
	return app.Form().Class("key-prompt").ID("key-prompt").OnSubmit(func(ctx app.Context, e app.Event) {
		e.PreventDefault()
		ctx.LocalStorage().Set(storageKey, strings.TrimSpace(p.key))
		ctx.Reload()
	}).Body(
		app.Label().For("staff-key").Text("Your staff key (from your instructor or the server's administrator), or the administrator's key"),
		app.Input().ID("staff-key").Type("password").AutoComplete(false).
			OnInput(textInto(&p.key)),
		app.Button().Type("submit").Text("Use this key"),
	)
}
