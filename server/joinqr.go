package server

import (
	"fmt"
	"net/http"
	"strings"

	qrcode "github.com/skip2/go-qrcode"
)

// serveJoinQR answers /join.png?code=CODE with a QR code of the station
// page's link for that join code, as this server is reached
// (http(s)://host/station?code=CODE): the set-up page projects it beside
// the code, and a laptop's camera opens the page with the code filled in.
// The code is only checked for its form; it is on the projector anyway.
func (s *Server) serveJoinQR(w http.ResponseWriter, r *http.Request) {
	code := r.URL.Query().Get("code")
	if len(code) != joinCodeLength || strings.Trim(code, joinCodeAlphabet) != "" {
		http.Error(w, "code: a join code is 6 characters of "+joinCodeAlphabet, http.StatusBadRequest)
		return
	}
	scheme := "http"
	if r.TLS != nil {
		scheme = "https"
	}
	png, err := qrcode.Encode(fmt.Sprintf("%s://%s/station?code=%s", scheme, r.Host, code), qrcode.Medium, 512)
	if err != nil {
		s.log.Error("join QR code", "err", err)
		http.Error(w, "internal error", http.StatusInternalServerError)
		return
	}
	w.Header().Set("Content-Type", "image/png")
	w.Header().Set("Cache-Control", "max-age=3600")
	w.Write(png)
}
