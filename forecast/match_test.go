package forecast

import (
	"strings"
	"testing"
)

func TestGlob(t *testing.T) {
	tests := []struct {
		pattern, s string
		want       bool
	}{
		{"", "", true},
		{"", "a", false},
		{"*", "", true},
		{"*", "anything", true},
		{"a*", "a", true},
		{"a*", "ba", false},
		{"*a", "bba", true},
		{"a*b*c", "axxbyyc", true},
		{"a*b*c", "axxbyy", false},
		{"a?c", "abc", true},
		{"a?c", "ac", false},
		{"a?c", "aéc", true}, // ? is one character, not one byte
		{"é*", "été", true},
		{"*.*", "a.b", true},
		{"/data*", "/data/disk1", true},
		{"/data*", "/var/data", false},
		{"**a", "a", true},
		{"*aab", "aaaab", true},
		{"?*?", "ab", true},
		{"?*?", "a", false},
	}
	for _, tc := range tests {
		if got := glob(tc.pattern, tc.s); got != tc.want {
			t.Errorf("glob(%q, %q) = %v, want %v", tc.pattern, tc.s, got, tc.want)
		}
	}
}

func TestMatcher(t *testing.T) {
	type series struct {
		metric string
		labels map[string]string
	}
	disk := series{"disk_used_ratio", map[string]string{"mount": "/data1", "host": "db-1"}}
	root := series{"disk_used_ratio", map[string]string{"mount": "/", "host": "web-2"}}
	odd := series{"odd metric", map[string]string{"path": `C:\a,b="c"`, "empty": ""}}
	tests := []struct {
		sel   string
		match []bool // disk, root, odd
	}{
		{"", []bool{true, true, true}},
		{"   ", []bool{true, true, true}},
		{"disk_used_ratio", []bool{true, true, false}},
		{"disk_*", []bool{true, true, false}},
		{"metric=disk_used_ratio", []bool{true, true, false}},
		{"metric!=disk_used_ratio", []bool{false, false, true}},
		{"disk_used_ratio,mount=/data*", []bool{true, false, false}},
		{"disk_used_ratio, mount = /data* , host!=web-?", []bool{true, false, false}},
		{"mount!=/data*", []bool{false, true, true}},
		{"host=db-?", []bool{true, false, false}},
		{`"odd metric"`, []bool{false, false, true}},
		{`path="C:\\a,b=\"c\""`, []bool{false, false, true}},
		{`path="C:\\a,*"`, []bool{false, false, true}},
		{`empty=""`, []bool{true, true, true}}, // absent or empty
		{`mount=""`, []bool{false, false, true}},
		{`mount!=""`, []bool{true, true, false}},
		{"mount=*", []bool{true, true, true}},
		{"mount=?*", []bool{true, true, false}},
		{`host="db-1",mount="/data1"`, []bool{true, false, false}},
	}
	for _, tc := range tests {
		m, err := ParseMatch(tc.sel)
		if err != nil {
			t.Errorf("ParseMatch(%q): %v", tc.sel, err)
			continue
		}
		for i, s := range []series{disk, root, odd} {
			if got := m.Match(s.metric, s.labels); got != tc.match[i] {
				t.Errorf("%q on %s%v: %v, want %v", tc.sel, s.metric, s.labels, got, tc.match[i])
			}
		}
		// String reads back to an equivalent matcher.
		back, err := ParseMatch(m.String())
		if err != nil {
			t.Errorf("ParseMatch(%q.String() = %q): %v", tc.sel, m.String(), err)
			continue
		}
		if back.String() != m.String() {
			t.Errorf("%q: String %q reads back as %q", tc.sel, m.String(), back.String())
		}
		for i, s := range []series{disk, root, odd} {
			if back.Match(s.metric, s.labels) != tc.match[i] {
				t.Errorf("%q: String %q matches differently", tc.sel, m.String())
			}
		}
	}
}

func TestMatcherString(t *testing.T) {
	tests := []struct{ in, want string }{
		{"", ""},
		{"disk_used_ratio,mount=/data*", "disk_used_ratio,mount=/data*"},
		{" a , b = c ", "a,b=c"},
		{"metric=a,b!=c", "metric=a,b!=c"},
		{`x="a b"`, `x="a b"`},
		{`x="q\"\\"`, `x="q\"\\"`},
		{`x=""`, `x=""`},
	}
	for _, tc := range tests {
		m, err := ParseMatch(tc.in)
		if err != nil {
			t.Fatalf("ParseMatch(%q): %v", tc.in, err)
		}
		if got := m.String(); got != tc.want {
			t.Errorf("ParseMatch(%q).String() = %q, want %q", tc.in, got, tc.want)
		}
	}
	if !(Matcher{}).IsZero() || !(Matcher{}).Match("x", nil) {
		t.Error("zero matcher")
	}
}

func TestParseMatchErrors(t *testing.T) {
	tests := []struct{ sel, want string }{
		{",", "empty term"},
		{"a,", "empty term"},
		{"a,,b=c", "empty term"},
		{"a,b", "only the first term"},
		{`a,"b"`, "only the first term"},
		{"=x", "missing name"},
		{"!=x", "missing name"},
		{"a=b=c", "quote the value"},
		{`a="b`, "unterminated"},
		{`a="b\`, "unterminated"},
		{`a="\n"`, "unknown escape"},
		{`a="b"c`, "expected ','"},
		{"a b=c", "invalid name"},
		{"a*=c", "invalid name"},
		{"my metric", "quote it"},
		{`a=b"`, "quote the value"},
	}
	for _, tc := range tests {
		_, err := ParseMatch(tc.sel)
		if err == nil {
			t.Errorf("ParseMatch(%q) succeeded", tc.sel)
			continue
		}
		if !strings.Contains(err.Error(), tc.want) || !strings.HasPrefix(err.Error(), "forecast: selector") {
			t.Errorf("ParseMatch(%q): %v, want it to mention %q", tc.sel, err, tc.want)
		}
	}
}

func FuzzParseMatch(f *testing.F) {
	for _, s := range []string{"", "a,b=c", `x="a\"b"`, "m=*?,n!=x"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		m, err := ParseMatch(s)
		if err != nil {
			return
		}
		back, err := ParseMatch(m.String())
		if err != nil {
			t.Fatalf("%q: String %q does not parse: %v", s, m.String(), err)
		}
		if back.String() != m.String() {
			t.Fatalf("%q: %q reads back as %q", s, m.String(), back.String())
		}
		m.Match("metric", map[string]string{"a": "b"})
	})
}
