//go:build !js

package wasmclient

import (
	"context"
	"errors"

	"google.golang.org/protobuf/proto"
)

// call exists so the package builds for the server, which registers the
// dashboard's routes; RPCs are only made from the browser.
func (c *api) call(ctx context.Context, proc string, req proto.Message, onMsg func([]byte) error) error {
	return errors.New("wasmclient: RPCs run only in the browser")
}

func download(name, contentType string, content []byte) {}
