// Package synth is the synthetic model golfer (documentation in progress).
package synth
