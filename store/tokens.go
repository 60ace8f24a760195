package store

import (
	"context"
	"crypto/rand"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/base64"
	"errors"
	"fmt"
	"slices"
	"strings"
	"time"

	"gorm.io/gorm"
)

// Role is what a token may do. Each role includes the ones before it in
// this order: viewer < ingest < planner < admin, except that an ingest
// token may post readings and events but not plan.
type Role string

// Roles.
const (
	RoleViewer  Role = "viewer"
	RoleIngest  Role = "ingest"
	RolePlanner Role = "planner"
	RoleAdmin   Role = "admin"
)

// Roles lists every role.
func Roles() []Role { return []Role{RoleViewer, RoleIngest, RolePlanner, RoleAdmin} }

// Valid reports whether r is known.
func (r Role) Valid() bool { return slices.Contains(Roles(), r) }

// Token is an API credential. Only a SHA-256 hash of its secret is kept;
// the secret is shown once, when the token is made.
type Token struct {
	ID         int64      `json:"id" gorm:"primaryKey"`
	Name       string     `json:"name"`
	Role       Role       `json:"role"`
	Sites      []int64    `json:"sites" gorm:"serializer:json"`
	Prefix     string     `json:"prefix"`
	Hash       []byte     `json:"-"`
	ExpiresAt  *time.Time `json:"expires_at"`
	RevokedAt  *time.Time `json:"revoked_at"`
	LastUsedAt *time.Time `json:"last_used_at"`
	// SessionsAfter ends the page sessions opened before it (sign-out).
	SessionsAfter *time.Time `json:"-"`
	CreatedAt     time.Time  `json:"created_at"`
	UpdatedAt     time.Time  `json:"updated_at"`
}

// NewToken describes a token to make.
type NewToken struct {
	Name      string     `json:"name"`
	Role      Role       `json:"role"`
	Sites     []int64    `json:"sites"`
	ExpiresAt *time.Time `json:"expires_at"`
}

// tokenPrefix starts every secret so that a leaked one is easy to spot in
// logs and by secret scanners.
const tokenPrefix = "kvd"

// ErrUnauthenticated: the token is missing, malformed, unknown, expired or
// revoked. The reason is not told to the caller.
var ErrUnauthenticated = errors.New("unauthenticated")

// CreateToken makes a token and returns it with its secret, which is
// stored only as a hash and cannot be shown again.
func (s *Store) CreateToken(ctx context.Context, n NewToken) (Token, string, error) {
	var fe fieldErrors
	fe.text("name", n.Name, true, 100)
	if !n.Role.Valid() {
		fe.add("role", "must be one of %v", Roles())
	}
	if n.ExpiresAt != nil && !n.ExpiresAt.After(s.now()) {
		fe.add("expires_at", "must lie in the future")
	}
	if err := fe.err(); err != nil {
		return Token{}, "", err
	}
	for _, id := range n.Sites {
		var c int64
		if err := s.db.WithContext(ctx).Model(&Site{}).Where("id = ?", id).Count(&c).Error; err != nil {
			return Token{}, "", fmt.Errorf("check site %d: %w", id, translate(err))
		}
		if c == 0 {
			fe.add("sites", "no site with id %d", id)
		}
	}
	if p := PrincipalFrom(ctx); !p.AllSites() {
		if len(n.Sites) == 0 {
			fe.add("sites", "a token limited to some sites can only make tokens limited to those sites")
		}
		for _, id := range n.Sites {
			if !p.CanSee(id) {
				fe.add("sites", "no site with id %d", id)
			}
		}
	}
	if err := fe.err(); err != nil {
		return Token{}, "", err
	}
	prefix, secret, err := newSecret()
	if err != nil {
		return Token{}, "", err
	}
	sum := sha256.Sum256([]byte(secret))
	t := Token{Name: strings.TrimSpace(n.Name), Role: n.Role, Sites: []int64{}, Prefix: prefix, Hash: sum[:], ExpiresAt: utcPtr(n.ExpiresAt)}
	if len(n.Sites) > 0 {
		t.Sites = slices.Clone(n.Sites)
		slices.Sort(t.Sites)
		t.Sites = slices.Compact(t.Sites)
	}
	err = s.tx(ctx, func(tx *gorm.DB) error {
		if err := tx.Create(&t).Error; err != nil {
			return translate(err)
		}
		return writeAudit(ctx, tx, "create", "tokens", t.ID, nil, &t)
	})
	if err != nil {
		return Token{}, "", fmt.Errorf("create token %q: %w", n.Name, err)
	}
	return t, secret, nil
}

// newSecret makes a token secret "kvd_<prefix>_<random>"; the prefix finds
// the row, the whole secret is compared by hash.
func newSecret() (prefix, secret string, err error) {
	b := make([]byte, 6+32)
	if _, err := rand.Read(b); err != nil {
		return "", "", fmt.Errorf("random token: %w", err)
	}
	prefix = base64.RawURLEncoding.EncodeToString(b[:6])
	secret = tokenPrefix + "_" + prefix + "_" + base64.RawURLEncoding.EncodeToString(b[6:])
	return prefix, secret, nil
}

// Authenticate checks a bearer secret and returns its token. The hash
// comparison takes constant time; the row is found by the public prefix.
// Any failure is ErrUnauthenticated.
func (s *Store) Authenticate(ctx context.Context, secret string) (Token, error) {
	prefix, _, ok := splitSecret(secret)
	if !ok || len(secret) > 200 {
		return Token{}, ErrUnauthenticated
	}
	var t Token
	err := s.db.WithContext(ctx).Where("prefix = ?", prefix).Take(&t).Error
	if errNoRows(err) {
		// Spend the same hashing work as a hit, so timing does not tell
		// a known prefix from an unknown one.
		sum := sha256.Sum256([]byte(secret))
		subtle.ConstantTimeCompare(sum[:], make([]byte, len(sum)))
		return Token{}, ErrUnauthenticated
	}
	if err != nil {
		return Token{}, fmt.Errorf("look up token: %w", translate(err))
	}
	sum := sha256.Sum256([]byte(secret))
	if subtle.ConstantTimeCompare(sum[:], t.Hash) != 1 {
		return Token{}, ErrUnauthenticated
	}
	now := s.now()
	if t.RevokedAt != nil || (t.ExpiresAt != nil && !now.Before(*t.ExpiresAt)) {
		return Token{}, ErrUnauthenticated
	}
	// Record use at most once a minute per token to keep reads cheap.
	if t.LastUsedAt == nil || now.Sub(*t.LastUsedAt) > time.Minute {
		s.db.WithContext(ctx).Model(&Token{}).Where("id = ?", t.ID).UpdateColumn("last_used_at", now)
	}
	return t, nil
}

// Principal returns the store principal a token acts as.
func (t Token) Principal() Principal {
	p := Principal{Actor: fmt.Sprintf("token:%d:%s", t.ID, t.Name)}
	if len(t.Sites) > 0 {
		p.Sites = slices.Clone(t.Sites)
	}
	return p
}

// Tokens lists tokens, newest first, without their hashes. A site-limited
// caller sees only tokens limited to sites it can see.
func (s *Store) Tokens(ctx context.Context) ([]Token, error) {
	var ts []Token
	if err := s.db.WithContext(ctx).Order("id DESC").Find(&ts).Error; err != nil {
		return nil, fmt.Errorf("list tokens: %w", translate(err))
	}
	p := PrincipalFrom(ctx)
	out := ts[:0]
	for _, t := range ts {
		if p.AllSites() || (len(t.Sites) > 0 && allVisible(p, t.Sites)) {
			t.Hash = nil
			out = append(out, t)
		}
	}
	return out, nil
}

func allVisible(p Principal, sites []int64) bool {
	for _, id := range sites {
		if !p.CanSee(id) {
			return false
		}
	}
	return true
}

// RevokeToken revokes a token by id. Revoking twice is harmless.
func (s *Store) RevokeToken(ctx context.Context, id int64) (Token, error) {
	var t Token
	err := s.tx(ctx, func(tx *gorm.DB) error {
		if err := tx.Where("id = ?", id).Take(&t).Error; err != nil {
			if errNoRows(err) {
				return fmt.Errorf("token %d: %w", id, ErrNotFound)
			}
			return translate(err)
		}
		p := PrincipalFrom(ctx)
		if !p.AllSites() && (len(t.Sites) == 0 || !allVisible(p, t.Sites)) {
			return fmt.Errorf("token %d: %w", id, ErrNotFound)
		}
		if t.RevokedAt != nil {
			return nil
		}
		before := t
		now := tx.NowFunc()
		t.RevokedAt = &now
		if err := tx.Select("revoked_at", "updated_at").Save(&t).Error; err != nil {
			return translate(err)
		}
		return writeAudit(ctx, tx, "revoke", "tokens", t.ID, &before, &t)
	})
	t.Hash = nil
	if err != nil {
		return Token{}, fmt.Errorf("revoke token %d: %w", id, err)
	}
	return t, nil
}

// Bootstrap makes secret an admin token named "bootstrap" when the store
// holds no token yet, so a new deployment can be reached with a secret the
// operator chose. It reports whether it made one. The secret must have the
// shape of a kelvard token ("kvd_" + 8 characters + "_" + at least 32).
func (s *Store) Bootstrap(ctx context.Context, secret string) (bool, error) {
	prefix, rest, ok := splitSecret(secret)
	if !ok || len(rest) < 32 {
		return false, fmt.Errorf("bootstrap token must look like %s_XXXXXXXX_<at least 32 characters>; make one with `kelvard token new-secret`", tokenPrefix)
	}
	made := false
	err := s.tx(ctx, func(tx *gorm.DB) error {
		var n int64
		if err := tx.Model(&Token{}).Count(&n).Error; err != nil {
			return translate(err)
		}
		if n > 0 {
			return nil
		}
		sum := sha256.Sum256([]byte(secret))
		t := Token{Name: "bootstrap", Role: RoleAdmin, Sites: []int64{}, Prefix: prefix, Hash: sum[:]}
		if err := tx.Create(&t).Error; err != nil {
			return translate(err)
		}
		made = true
		return writeAudit(ctx, tx, "create", "tokens", t.ID, nil, &t)
	})
	if errors.Is(err, ErrDuplicate) {
		// Another replica made it at the same moment.
		return false, nil
	}
	if err != nil {
		return false, fmt.Errorf("bootstrap token: %w", err)
	}
	return made, nil
}

// splitSecret takes "kvd_" + 8-character prefix + "_" + random part apart.
// The prefix and random part are base64url, which may itself hold "_", so
// the split goes by position.
func splitSecret(secret string) (prefix, rest string, ok bool) {
	head := tokenPrefix + "_"
	if len(secret) < len(head)+8+2 || !strings.HasPrefix(secret, head) || secret[len(head)+8] != '_' {
		return "", "", false
	}
	return secret[len(head) : len(head)+8], secret[len(head)+9:], true
}

// NewSecret returns a fresh secret in the token format, for operators who
// want to choose a bootstrap token ahead of the first start.
func NewSecret() (string, error) {
	_, secret, err := newSecret()
	return secret, err
}
