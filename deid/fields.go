package deid

import (
	"fmt"
	"slices"
	"sort"
	"strings"

	"muarc/schema"
)

// The facts about each metadata field (its path, its class, the actions a
// policy may choose for it, its default) live in the field registry,
// schema.Fields; this file only reads them.

// extraClass is the class of an extra field ("<group>.extra.<name>"): any
// value type, so the actions of schema.ExtraActions.
const extraClass schema.Class = "extra"

// policyField returns the registry field a policy path names, or false
// when it is not a policy field (recorded data, root attributes, unknown).
func policyField(path string) (schema.Field, bool) {
	f, ok := schema.FieldByPath(path)
	if !ok || !isPolicyClass(f.Class) {
		return schema.Field{}, false
	}
	return f, true
}

func isPolicyClass(c schema.Class) bool { return c != schema.ClassCarried && c != schema.ClassFile }

// classOf returns the class of a policy path and whether the path is a
// policy field of the layout (a named field or an extra-field path).
func classOf(path string) (schema.Class, bool) {
	if f, ok := policyField(path); ok {
		return f.Class, true
	}
	if _, _, ok := schema.ExtraGroupOf(path); ok {
		return extraClass, true
	}
	return "", false
}

// actionsOf are the actions a policy may choose for a path ("" class: none).
func actionsOf(path string) []Action {
	c, ok := classOf(path)
	if !ok {
		return nil
	}
	names := schema.ExtraActions
	if c != extraClass {
		names = schema.ClassActions[c]
	}
	out := make([]Action, len(names))
	for i, n := range names {
		out[i] = Action(n)
	}
	return out
}

// policyPaths lists every named policy field of the registry and every
// "<group>.extra.*" pattern, sorted.
func policyPaths() []string {
	var out []string
	for _, f := range schema.Fields {
		if isPolicyClass(f.Class) {
			out = append(out, f.Path())
		}
	}
	for _, g := range schema.Groups {
		if g.Extras {
			out = append(out, g.Prefix+".extra.*")
		}
	}
	sort.Strings(out)
	return out
}

// checkField reports a path that is not a field or an action not allowed.
func checkField(path string, act Action) error {
	acts := actionsOf(path)
	if acts == nil {
		return fmt.Errorf("field %q is not a metadata field of the layout (paths look like \"subject.name\", \"trials[].notes\", \"subject.extra.*\"; the data themselves are always kept)%s", path, suggestPath(path))
	}
	if slices.Contains(acts, act) {
		return nil
	}
	return fmt.Errorf("field %q: action %q not possible here (choose %s)", path, act, joinActions(acts))
}

// joinActions writes actions as "keep, drop or scrub".
func joinActions(acts []Action) string {
	names := make([]string, len(acts))
	for i, a := range acts {
		names[i] = string(a)
	}
	if len(names) <= 1 {
		return strings.Join(names, "")
	}
	return strings.Join(names[:len(names)-1], ", ") + " or " + names[len(names)-1]
}

// fixActions are the actions that take a value out of an output, for a
// hint: every action the field allows except keep.
func fixActions(path string) []Action {
	var out []Action
	for _, a := range actionsOf(path) {
		if a != Keep {
			out = append(out, a)
		}
	}
	return out
}

// suggestPath names the registry paths closest to a mistyped one (at most
// two edits away, or with the same last part).
func suggestPath(path string) string {
	last := path
	if i := strings.LastIndex(path, "."); i >= 0 {
		last = path[i+1:]
	}
	var hits []string
	for _, p := range policyPaths() {
		if strings.HasSuffix(p, "."+last) || editDistance(p, path) <= 2 {
			hits = append(hits, p)
		}
	}
	if len(hits) == 0 || len(hits) > 6 {
		return ""
	}
	return "; did you mean " + strings.Join(hits, " or ") + "?"
}

// editDistance is the Levenshtein distance of a and b (bytes).
func editDistance(a, b string) int {
	if len(a) > 200 || len(b) > 200 {
		return 1 << 20
	}
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			c := prev[j-1]
			if a[i-1] != b[j-1] {
				c++
			}
			cur[j] = min(c, prev[j]+1, cur[j-1]+1)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}

// policyPath turns a concrete path ("trials[2].arrays[0].notes") into policy
// form ("trials[].arrays[].notes").
func policyPath(concrete string) string {
	var b strings.Builder
	skip := false
	for _, r := range concrete {
		switch {
		case r == '[':
			skip = true
			b.WriteRune(r)
		case r == ']':
			skip = false
			b.WriteRune(r)
		case !skip:
			b.WriteRune(r)
		}
	}
	return b.String()
}

// PolicyPath turns a concrete metadata-view path with list indices, as
// IdentifyingFields returns, into the policy form: "trials[2].notes" ->
// "trials[].notes".
func PolicyPath(concrete string) string { return policyPath(concrete) }
