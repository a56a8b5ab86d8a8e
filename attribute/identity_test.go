package attribute

import (
	"testing"
)

// The Go names below have the shapes the Go toolchain gives closures,
// statement wrappers, range-over-func bodies and generic instantiations in
// symbol tables and profiles (cmd/compile's closure naming: outer.funcN,
// nested outer.funcN.M, outer.gowrapN, outer.deferwrapN, outer-rangeN;
// go.shape type arguments in brackets) — recalled from the Go toolchain,
// not from a published table. The JVM names follow the shapes HotSpot
// prints in stack traces (lambda$method$N bodies, Outer$$Lambda$N/0x…
// classes before JDK 21 and Outer$$Lambda/0x… hidden classes since),
// also recalled from memory.
func TestIdentity(t *testing.T) {
	tests := []struct {
		name string
		in   []string // all must map to want
		want string
	}{
		{"go closure", []string{
			"example.com/shop/api.handler.func1",
			"example.com/shop/api.handler.func2",
			"example.com/shop/api.handler.func17",
		}, "example.com/shop/api.handler.func*"},
		{"go nested closures", []string{
			"example.com/shop/api.handler.func1.2",
			"example.com/shop/api.handler.func3.1",
			"example.com/shop/api.handler.func1.func2",
			"example.com/shop/api.handler.func1",
		}, "example.com/shop/api.handler.func*"},
		{"go statement wrappers and range bodies", []string{
			"example.com/shop/api.handler.gowrap3",
			"example.com/shop/api.handler.deferwrap1",
			"example.com/shop/api.handler-range2",
			"example.com/shop/api.handler-range1.func2",
			"example.com/shop/api.handler.func1-range3.2",
		}, "example.com/shop/api.handler.func*"},
		{"go method closure", []string{
			"example.com/shop/store.(*Repo).Load.func4",
			"example.com/shop/store.(*Repo).Load.func1.3",
		}, "example.com/shop/store.(*Repo).Load.func*"},
		{"go main package closure", []string{"main.main.func1", "main.main.gowrap2"}, "main.main.func*"},
		{"go method value wrapper kept", []string{"example.com/shop/api.handler.func2-fm"}, "example.com/shop/api.handler.func*-fm"},
		{"go top-level function named like a closure", []string{"example.com/shop/gen.func1"}, "example.com/shop/gen.func1"},
		{"go name that only starts like a closure", []string{"example.com/shop/api.handler.func1x"}, "example.com/shop/api.handler.func1x"},
		{"go generic function", []string{
			"example.com/shop/util.Map[go.shape.int,go.shape.string]",
			"example.com/shop/util.Map[go.shape.string,go.shape.[]uint8]",
			"example.com/shop/util.Map[...]",
		}, "example.com/shop/util.Map[…]"},
		{"go generic nested brackets and struct shapes", []string{
			"example.com/shop/util.Map[go.shape.map[string]int,go.shape.struct { A int; B []string }]",
		}, "example.com/shop/util.Map[…]"},
		{"go two bracket groups with a closure", []string{
			"example.com/shop/cache.(*LRU[go.shape.string,go.shape.int]).Get.Map[go.shape.int].func3",
			"example.com/shop/cache.(*LRU[go.shape.int64,go.shape.*uint8]).Get.Map[go.shape.uint].func1.1",
		}, "example.com/shop/cache.Map[…].func*"}, // Map was inlined into Get: its closures are Map's
		{"go closure made in inlined code", []string{
			"main.handler.each.handler.func1.func3", // as go1.26 names it with inlining (TestIdentityAcrossBuilds)
			"main.handler.func1.1",                  // and with -gcflags=-l
		}, "main.handler.func*"},
		{"go value method closure", []string{"example.com/shop/api.Plot.Names.func1"}, "example.com/shop/api.Names.func*"},
		{"jvm lambda body", []string{
			"com.example.shop.OrderService.lambda$loadAll$0",
			"com.example.shop.OrderService.lambda$loadAll$12",
		}, "com.example.shop.OrderService.lambda$loadAll$*"},
		{"jvm lambda class", []string{
			"com.example.shop.OrderService$$Lambda$123/0x0000000800c0b0.apply",
			"com.example.shop.OrderService$$Lambda$7/0x0000000800066840.apply",
			"com.example.shop.OrderService$$Lambda/0x000071d1c8003800.apply",
			"com.example.shop.OrderService$$Lambda$1/1234567.apply",
		}, "com.example.shop.OrderService$$Lambda.apply"},
		{"jvm anonymous class and accessor", []string{
			"com.example.shop.OrderService$1.run",
			"com.example.shop.OrderService$3.run",
		}, "com.example.shop.OrderService$*.run"},
		{"jvm accessor", []string{"com.example.shop.Cart.access$000", "com.example.shop.Cart.access$100"}, "com.example.shop.Cart.access$*"},
		{"jvm generated proxy hash", []string{
			"com.example.shop.CartService$$Proxy$$1a2b3c4d.checkout",
			"com.example.shop.CartService$$Proxy$$9f8e7d6c.checkout",
		}, "com.example.shop.CartService$$Proxy$$*.checkout"},
		{"jvm named inner class kept", []string{"com.example.shop.Cart$Line.total"}, "com.example.shop.Cart$Line.total"},
		{"python lambda kept", []string{"shop.orders.<lambda>"}, "shop.orders.<lambda>"},
		{"python comprehension kept", []string{"shop.orders.<listcomp>"}, "shop.orders.<listcomp>"},
		{"javascript anonymous", []string{
			"OrderRouter.<anonymous>",
			"OrderRouter.(anonymous)",
			"OrderRouter.(anonymous function)",
		}, "OrderRouter.(anonymous)"},
		{"route with brackets kept", []string{"/items/[id]"}, "/items/[id]"},
		{"empty brackets kept", []string{"com.example.shop.Codec.decode(byte[])"}, "com.example.shop.Codec.decode(byte[])"},
		{"unbalanced bracket kept", []string{"example.com/shop/util.Map[go.shape.int"}, "example.com/shop/util.Map[go.shape.int"},
		{"no application frame bucket", []string{"(no application frame) main.main.func3"}, "(no application frame) main.main.func*"},
		{"surrounding space", []string{"  example.com/shop/api.handler  "}, "example.com/shop/api.handler"},
		{"empty", []string{""}, ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			for _, in := range tt.in {
				got := Identity(in)
				if got != tt.want {
					t.Errorf("Identity(%q) = %q, want %q", in, got, tt.want)
				}
				if again := Identity(got); again != got {
					t.Errorf("Identity is not idempotent on %q: %q", got, again)
				}
			}
		})
	}
}

// TestIdentityDistinct checks that Identity keeps apart what a rebuild
// does not change: different functions, packages and receivers.
func TestIdentityDistinct(t *testing.T) {
	pairs := []struct{ a, b string }{
		{"example.com/shop/api.handler.func1", "example.com/shop/api.render.func1"},
		{"example.com/shop/api.handler.func1", "example.com/shop/api.handler"},
		{"example.com/shop/store.(*Repo).Load", "example.com/shop/store.(*Cache).Load"},
		{"example.com/shop/util.Map[go.shape.int]", "example.com/shop/util.Filter[go.shape.int]"},
		{"com.example.shop.A.lambda$run$0", "com.example.shop.A.lambda$stop$0"},
		{"example.com/shop/gen.func1", "example.com/shop/gen.func2"},
	}
	for _, p := range pairs {
		t.Run(p.a+" vs "+p.b, func(t *testing.T) {
			if Identity(p.a) == Identity(p.b) {
				t.Errorf("Identity(%q) == Identity(%q) == %q", p.a, p.b, Identity(p.a))
			}
		})
	}
}
