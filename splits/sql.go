package splits

import (
	"database/sql/driver"
	"fmt"
	"sync"

	"splitsmith/internal/sqlfn"
)

// keyArg reads a key argument: INTEGER is a content digest (8 bytes big-endian), BLOB is the
// key bytes (as split_key returns them), TEXT its UTF-8 bytes.
func keyArg(args []driver.Value, i int) ([]byte, error) {
	switch v := args[i].(type) {
	case int64:
		return DigestKey(v), nil
	case []byte:
		return v, nil
	case string:
		return []byte(v), nil
	}
	return nil, fmt.Errorf("argument %d (key) must be INTEGER (a digest), BLOB (split_key) or TEXT, got %s", i+1, sqlfn.TypeName(args[i]))
}

// sidesCache keeps parsed side lists, since split_side is called once per row.
var sidesCache sync.Map // string -> []float64 cum, []string names

type parsedSides struct {
	names []string
	cum   []float64
}

func sidesArg(args []driver.Value, i int) (*parsedSides, error) {
	s, err := sqlfn.Text(args, i, "sides")
	if err != nil {
		return nil, err
	}
	if p, ok := sidesCache.Load(s); ok {
		return p.(*parsedSides), nil
	}
	sd, err := ParseSides(s)
	if err != nil {
		return nil, fmt.Errorf("argument %d (sides): %w", i+1, err)
	}
	sp := &Spec{Name: "x", Table: "x", Sides: sd}
	if err := sp.Resolve(); err != nil {
		return nil, fmt.Errorf("argument %d (sides): %v", i+1, err.(*FieldError).Msg)
	}
	p := &parsedSides{}
	fr := make([]float64, len(sd))
	for j, x := range sd {
		p.names = append(p.names, x.Name)
		fr[j] = x.Fraction
	}
	p.cum = Cumulative(fr)
	if len(s) < 1024 {
		sidesCache.Store(s, p)
	}
	return p, nil
}

func seedArg(args []driver.Value, i int) (uint64, error) {
	s, err := sqlfn.Int(args, i, "seed")
	return uint64(s), err
}

// SQL returns the SQL functions this package declares (see DEVELOPERS.md).
func SQL() sqlfn.Set {
	return sqlfn.Set{Package: "splits", Funcs: []sqlfn.Func{
		{
			Name: "split_key", NArgs: -1, Deterministic: true, Args: "v1, ..., vn",
			Doc:      "the key bytes of values: each as tag byte, 4-byte big-endian length and bytes (the content-digest encoding)",
			Examples: []sqlfn.Example{{SQL: "SELECT hex(split_key('S-0042'))", Want: "0300000006532D30303432"}, {SQL: "SELECT hex(split_key(7, NULL))", Want: "0100000001370000000000"}},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				vals := make([]any, len(args))
				for i, a := range args {
					vals[i] = normalizeSQL(a)
				}
				b, err := Key(vals...)
				if err != nil {
					return nil, err
				}
				if b == nil {
					b = []byte{}
				}
				return b, nil
			},
		},
		{
			Name: "split_hash_u", NArgs: 2, Deterministic: true, Args: "key, seed",
			Doc:      "u in [0,1): (first 8 bytes big-endian of SHA-256(seed as 8 bytes big-endian || key bytes)) >> 11, / 2^53",
			Examples: []sqlfn.Example{{SQL: "SELECT split_hash_u(1854158007365103010, 1)", Want: exampleU}},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				if args[0] == nil || args[1] == nil {
					return nil, nil
				}
				k, err := keyArg(args, 0)
				if err != nil {
					return nil, err
				}
				s, err := seedArg(args, 1)
				if err != nil {
					return nil, err
				}
				return HashU(k, s), nil
			},
		},
		{
			Name: "split_bucket", NArgs: 3, Deterministic: true, Args: "key, seed, n",
			Doc:      "floor(split_hash_u(key, seed) * n): a bucket in 0..n-1",
			Examples: []sqlfn.Example{{SQL: "SELECT split_bucket(1854158007365103010, 1, 10)", Want: exampleBucket}},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				if args[0] == nil || args[1] == nil || args[2] == nil {
					return nil, nil
				}
				k, err := keyArg(args, 0)
				if err != nil {
					return nil, err
				}
				s, err := seedArg(args, 1)
				if err != nil {
					return nil, err
				}
				n, err := sqlfn.Int(args, 2, "n")
				if err != nil {
					return nil, err
				}
				if n <= 0 || n > 1<<31 {
					return nil, fmt.Errorf("argument 3 (n) must be in 1..2^31, got %d", n)
				}
				return int64(Bucket(k, s, int(n))), nil
			},
		},
		{
			Name: "split_side", NArgs: 3, Deterministic: true, Args: "key, seed, sides",
			Doc:      "the side of a key under the hash specification: the first side whose cumulative fraction exceeds split_hash_u(key, seed)",
			Examples: []sqlfn.Example{{SQL: "SELECT split_side(1854158007365103010, 1, 'train=0.8,holdout=0.2')", Want: exampleSide}},
			Scalar: func(args []driver.Value) (driver.Value, error) {
				if args[0] == nil || args[1] == nil || args[2] == nil {
					return nil, nil
				}
				k, err := keyArg(args, 0)
				if err != nil {
					return nil, err
				}
				s, err := seedArg(args, 1)
				if err != nil {
					return nil, err
				}
				p, err := sidesArg(args, 2)
				if err != nil {
					return nil, err
				}
				return p.names[SideIndex(HashU(k, s), p.cum)], nil
			},
		},
		{
			Name: "split_seal", NArgs: 1, Deterministic: true, Args: "digest",
			Doc:      "order-independent seal of a set of content digests: hex SHA-256 of the digests sorted ascending, 8 bytes big-endian each",
			Examples: []sqlfn.Example{{SQL: "SELECT split_seal(x) FROM (SELECT 2 AS x UNION ALL SELECT 1)", Want: exampleSeal12}},
			NewAgg:   func() sqlfn.Agg { return &sealAgg{} },
		},
	}}
}

type sealAgg struct{ ds []int64 }

func (a *sealAgg) Step(args []driver.Value) error {
	if args[0] == nil {
		return nil
	}
	v, err := sqlfn.Int(args, 0, "digest")
	if err != nil {
		return err
	}
	a.ds = append(a.ds, v)
	return nil
}

func (a *sealAgg) Value() (driver.Value, error) { return Seal(append([]int64(nil), a.ds...)), nil }

func normalizeSQL(v driver.Value) any {
	switch x := v.(type) {
	case []byte:
		return string(x)
	}
	return normalize(v)
}

// Example results, recomputed with Python's hashlib (see hash_test.go for the snippet).
const (
	exampleU      = "0.5774933755932542"
	exampleBucket = "5"
	exampleSide   = "train"
	exampleSeal12 = "8c7654ecfd7b0b623b803e2f4e02ad1cc84278efdfcd7c4c9208edd81f17e115"
)
