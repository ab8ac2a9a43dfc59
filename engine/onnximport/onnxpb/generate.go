// Package onnxpb is the Go binding of the part of the ONNX model format
// that stackfit reads, generated from model.proto. Messages declare only
// the fields the importer uses, with the format's field numbers; the rest
// of a model, its weights' values first, is skipped on decode.
package onnxpb

//go:generate protoc --go_out=. --go_opt=paths=source_relative model.proto
