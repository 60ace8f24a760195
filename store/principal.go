package store

import (
	"context"
	"slices"
)

// Principal is who is acting: the actor name written to the audit log and
// the sites the actor may see. A nil Sites means every site.
type Principal struct {
	Actor string
	Sites []int64
}

// AllSites reports whether the principal is unrestricted.
func (p Principal) AllSites() bool { return p.Sites == nil }

// CanSee reports whether the principal may see the site.
func (p Principal) CanSee(siteID int64) bool {
	return p.Sites == nil || slices.Contains(p.Sites, siteID)
}

type principalKey struct{}

// WithPrincipal returns a context that carries p. Every store query made
// with that context honours p's site limit and every write is audited under
// p's name.
func WithPrincipal(ctx context.Context, p Principal) context.Context {
	return context.WithValue(ctx, principalKey{}, p)
}

// PrincipalFrom returns the principal in ctx. Without one the caller is the
// system itself (the scheduler or the command line): every site, actor
// "system".
func PrincipalFrom(ctx context.Context) Principal {
	if p, ok := ctx.Value(principalKey{}).(Principal); ok {
		return p
	}
	return Principal{Actor: "system"}
}
