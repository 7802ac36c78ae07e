//go:build !failpoints

package server

import "example.com/fluxroom/domain"

// hooks is empty in the release build: the test switches (hooks.go) are
// compiled only with -tags failpoints, and these stand-ins cost nothing.
type hooks struct{}

func (s *Server) fail(string) error { return nil }

func (s *Server) ackEarly(uint64, uint64, domain.Reading) bool { return false }

func (s *Server) skipJudging() bool { return false }
