package provenance

import (
	"crypto/sha256"
	"crypto/sha512"
	"encoding/hex"
	"os"
	"path/filepath"
	"testing"
)

// FIPS 180-4 example vectors (NIST, "Secure Hash Standard", FIPS PUB
// 180-4, and its examples of SHA-256 and SHA-512): the one-block message
// "abc", the 448-bit two-block message for SHA-256 and the 896-bit
// message for SHA-512.
func TestFIPS180Vectors(t *testing.T) {
	msg448 := "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"
	msg896 := "abcdefghbcdefghicdefghijdefghijkefghijklfghijklmghijklmnhijklmnoijklmnopjklmnopqklmnopqrlmnopqrsmnopqrstnopqrstu"
	cases := []struct {
		name, msg, want string
		sum             func([]byte) []byte
	}{
		{"SHA-256 abc", "abc", "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad", func(b []byte) []byte { s := sha256.Sum256(b); return s[:] }},
		{"SHA-256 448-bit", msg448, "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1", func(b []byte) []byte { s := sha256.Sum256(b); return s[:] }},
		{"SHA-512 abc", "abc", "ddaf35a193617abacc417349ae20413112e6fa4e89a97ea20a9eeee64b55d39a2192992a274fc1a836ba3c23a3feebbd454d4423643ce80e2a9ac94fa54ca49f", func(b []byte) []byte { s := sha512.Sum512(b); return s[:] }},
		{"SHA-512 896-bit", msg896, "8e959b75dae313da8cf4f72814fc143f8f7779c6eb9f7fa17299aeadb6889018501d289e4900f7e4331b99dec4b5433ac7d329eeb6dd26545e96e55b874be909", func(b []byte) []byte { s := sha512.Sum512(b); return s[:] }},
	}
	for _, c := range cases {
		if got := hex.EncodeToString(c.sum([]byte(c.msg))); got != c.want {
			t.Errorf("%s = %s, want %s", c.name, got, c.want)
		}
	}
	// HashFile streams the same digest as the one-shot function.
	p := filepath.Join(t.TempDir(), "m")
	os.WriteFile(p, []byte(msg448), 0o644)
	s, err := HashFile(p)
	if err != nil || s.SHA256 != cases[1].want || s.Bytes != 56 {
		t.Errorf("HashFile = %+v, %v", s, err)
	}
}
