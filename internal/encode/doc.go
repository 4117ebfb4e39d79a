// Package encode turns analysis results and captures into bytes for people and programs.
package encode
