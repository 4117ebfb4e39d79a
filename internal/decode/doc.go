// Package decode turns capture bytes into a kinchainv1.Capture: the CSV
// format (long format, one row per sample), protojson and binary protobuf.
// It checks syntax, structure and size limits while reading; the rules about
// values (time order, unit quaternions, rates, ...) belong to package
// validate, which the caller runs next:
//
//	pc, loc, err := decode.File(name, data, lim)
//	...
//	c, err := validate.Capture(pc, lim, loc)
//
// Every error is a *validate.Error naming the column or field and, where
// known, the line of the input.
package decode
