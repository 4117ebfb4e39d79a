package server

import (
	"net/url"
	"sort"
	"strings"

	"github.com/grpc-ecosystem/grpc-gateway/v2/runtime"
	"google.golang.org/protobuf/reflect/protoreflect"

	kinchainv1 "github.com/kinchain/kinchain/api/kinchain/v1"
)

// QueryOptions reads AnalysisOptions from URL query parameters, for CSV
// uploads: each parameter is an AnalysisOptions field by its proto name or
// JSON name, nested fields with dots (neutral.start_s=0&neutral.end_s=0.8),
// e.g. ?cutoff_hz=10&speed=vertical&include_series=true&handedness=left.
// Enum values may be given in full (SPEED_DEFINITION_VERTICAL), without
// the enum's prefix and in any case (vertical, long-axis), or as numbers.
// neutral=START:END is short for the two neutral fields. An unknown
// parameter, a repeated one or a bad value is INVALID_ARGUMENT naming it.
func QueryOptions(q url.Values) (*kinchainv1.AnalysisOptions, error) {
	opts := &kinchainv1.AnalysisOptions{}
	keys := make([]string, 0, len(q))
	for k := range q {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, key := range keys {
		vals := q[key]
		if len(vals) != 1 {
			return nil, fieldViolation(key, "REPEATED_PARAMETER", "given %d times; give it once", len(vals))
		}
		v := vals[0]
		if key == "neutral" {
			start, end, ok := strings.Cut(v, ":")
			if !ok {
				return nil, fieldViolation(key, "INVALID_VALUE", "%q is not START:END in seconds", v)
			}
			for _, p := range [][2]string{{"neutral.start_s", start}, {"neutral.end_s", end}} {
				if err := runtime.PopulateFieldFromPath(opts, p[0], p[1]); err != nil {
					return nil, fieldViolation(key, "INVALID_VALUE", "%q is not START:END in seconds", v)
				}
			}
			continue
		}
		path, fd, err := resolveField(opts.ProtoReflect().Descriptor(), key)
		if err != nil {
			return nil, err
		}
		if fd.Kind() == protoreflect.EnumKind {
			v = enumValue(fd.Enum(), v)
		}
		if err := runtime.PopulateFieldFromPath(opts, path, v); err != nil {
			return nil, fieldViolation(key, "INVALID_VALUE", "%q: %v", vals[0], err)
		}
	}
	return opts, nil
}

// resolveField maps a dotted parameter name (proto or JSON names) to the
// proto-name path and the leaf field.
func resolveField(md protoreflect.MessageDescriptor, key string) (string, protoreflect.FieldDescriptor, error) {
	parts := strings.Split(key, ".")
	names := make([]string, len(parts))
	var fd protoreflect.FieldDescriptor
	for i, p := range parts {
		if md == nil {
			return "", nil, fieldViolation(key, "UNKNOWN_PARAMETER", "%q has no fields", strings.Join(parts[:i], "."))
		}
		fd = md.Fields().ByName(protoreflect.Name(p))
		if fd == nil {
			fd = md.Fields().ByJSONName(p)
		}
		if fd == nil {
			return "", nil, fieldViolation(key, "UNKNOWN_PARAMETER", "not an analysis option; the options are %s", optionNames(md))
		}
		names[i] = string(fd.Name())
		md = fd.Message()
	}
	if fd.Message() != nil {
		return "", nil, fieldViolation(key, "UNKNOWN_PARAMETER", "set its fields: %s", optionNames(fd.Message()))
	}
	return strings.Join(names, "."), fd, nil
}

func optionNames(md protoreflect.MessageDescriptor) string {
	var names []string
	for i := 0; i < md.Fields().Len(); i++ {
		names = append(names, string(md.Fields().Get(i).Name()))
	}
	return strings.Join(names, ", ")
}

// enumValue expands a short enum value ("vertical", "long-axis") to its
// full name when that names a value; otherwise v is returned unchanged for
// the gateway's parser to accept (full name, number) or reject.
func enumValue(ed protoreflect.EnumDescriptor, v string) string {
	if ed.Values().ByName(protoreflect.Name(v)) != nil {
		return v
	}
	prefix := enumPrefix(ed)
	full := prefix + strings.ToUpper(strings.NewReplacer("-", "_", " ", "_").Replace(v))
	if ed.Values().ByName(protoreflect.Name(full)) != nil {
		return full
	}
	if ed.Values().ByName(protoreflect.Name(strings.ToUpper(v))) != nil {
		return strings.ToUpper(v)
	}
	return v
}

// enumPrefix is the UPPER_SNAKE_CASE of the enum's name plus "_", the
// prefix buf's STANDARD lint requires of every value (SpeedDefinition →
// SPEED_DEFINITION_).
func enumPrefix(ed protoreflect.EnumDescriptor) string {
	name := string(ed.Name())
	var b strings.Builder
	for i, r := range name {
		if i > 0 && r >= 'A' && r <= 'Z' {
			b.WriteByte('_')
		}
		b.WriteRune(r)
	}
	return strings.ToUpper(b.String()) + "_"
}
