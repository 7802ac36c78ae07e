// The dashboard's WebAssembly links this package to validate readings as
// the server does, but it never judges them; this file, which ties each
// experiment to its judging, is left out of that build, so the judging
// (about 90 KB of the gzipped app.wasm) is not sent to every browser.
// internal/importcheck keeps it so.

//go:build !js

package domain

// judges are the experiments' judgings, by experiment id.
var judges = map[string]judge{
	coilForce.ID:    assessCoilForce,
	eOverM.ID:       assessChargeToMass,
	straightWire.ID: assessStraightWire,
	solenoid.ID:     assessSolenoid,
	flatCoil.ID:     assessFlatCoil,
}
