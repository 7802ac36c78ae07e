//go:build js

package wasmclient

import (
	"context"
	"fmt"
	"syscall/js"

	"google.golang.org/protobuf/proto"

	"example.com/fluxroom/internal/grpcweb"
)

// call makes one gRPC-Web call with the browser's fetch and hands every
// reply message to onMsg; it returns the call's status as an error. The
// fetch is aborted when ctx ends.
func (c *api) call(ctx context.Context, proc string, req proto.Message, onMsg func([]byte) error) error {
	body, err := proto.Marshal(req)
	if err != nil {
		return err
	}
	framed := grpcweb.Frame(body)
	arr := js.Global().Get("Uint8Array").New(len(framed))
	js.CopyBytesToJS(arr, framed)
	abort := js.Global().Get("AbortController").New()
	stop := context.AfterFunc(ctx, func() { abort.Call("abort") })
	defer stop()
	headers := js.Global().Get("Object").New()
	headers.Set("Content-Type", grpcweb.ContentType)
	headers.Set("Accept", grpcweb.ContentType)
	headers.Set("X-Grpc-Web", "1")
	if c.token != "" {
		headers.Set("Authorization", "Bearer "+c.token)
	}
	opts := js.Global().Get("Object").New()
	opts.Set("method", "POST")
	opts.Set("headers", headers)
	opts.Set("body", arr)
	opts.Set("signal", abort.Get("signal"))
	opts.Set("cache", "no-store")
	resp, err := await(js.Global().Call("fetch", c.base+proc, opts))
	if err != nil {
		return &rpcError{code: codeUnavailable, msg: err.Error()}
	}
	hdr := resp.Get("headers")
	get := func(k string) string {
		v := hdr.Call("get", k)
		if v.IsNull() {
			return ""
		}
		return v.String()
	}
	if st := resp.Get("status").Int(); st != 200 {
		if err := statusFrom(get); err != nil {
			return err
		}
		return &rpcError{code: codeUnavailable, msg: fmt.Sprintf("HTTP %d", st)}
	}
	// A trailers-only reply carries the status in the headers.
	if err := statusFrom(get); err != nil {
		return err
	}
	reader := resp.Get("body").Call("getReader")
	var d grpcweb.Deframer
	for {
		chunk, err := await(reader.Call("read"))
		if err != nil {
			return &rpcError{code: codeUnavailable, msg: err.Error()}
		}
		if chunk.Get("done").Bool() {
			return &rpcError{code: codeUnavailable, msg: "stream ended without a status"}
		}
		v := chunk.Get("value")
		b := make([]byte, v.Get("length").Int())
		js.CopyBytesToGo(b, v)
		msgs, trailer, done := d.Push(b)
		for _, m := range msgs {
			if err := onMsg(m); err != nil {
				return err
			}
		}
		if done {
			return statusFrom(grpcweb.TrailerLines(trailer))
		}
	}
}

// await waits for a JavaScript promise.
func await(p js.Value) (js.Value, error) {
	type result struct {
		v   js.Value
		err error
	}
	ch := make(chan result, 1)
	var then, catch js.Func
	then = js.FuncOf(func(this js.Value, args []js.Value) any {
		ch <- result{v: args[0]}
		return nil
	})
	catch = js.FuncOf(func(this js.Value, args []js.Value) any {
		msg := "request failed"
		if len(args) > 0 && args[0].Truthy() {
			msg = args[0].Call("toString").String()
		}
		ch <- result{err: fmt.Errorf("%s", msg)}
		return nil
	})
	p.Call("then", then, catch)
	r := <-ch
	then.Release()
	catch.Release()
	return r.v, r.err
}

// download hands bytes to the browser as a file.
func download(name, contentType string, content []byte) {
	arr := js.Global().Get("Uint8Array").New(len(content))
	js.CopyBytesToJS(arr, content)
	parts := js.Global().Get("Array").New(arr)
	opts := js.Global().Get("Object").New()
	opts.Set("type", contentType)
	blob := js.Global().Get("Blob").New(parts, opts)
	url := js.Global().Get("URL").Call("createObjectURL", blob)
	a := js.Global().Get("document").Call("createElement", "a")
	a.Set("href", url)
	a.Set("download", name)
	a.Call("click")
	js.Global().Get("URL").Call("revokeObjectURL", url)
}
