// defines: encodeModelProto and the ONNX message types it writes — the subset of the
// ONNX IR schema (onnx/onnx.proto3 in the ONNX specification) this project needs,
// written field by field with protobufjs/minimal's Writer. Field numbers are the
// specification's; fields not listed here are never written.
//
// Why by hand: protobufjs reflection (Root.fromJSON → Type.encode) compiles an encoder
// per message type with `new Function` at first use, and the workbench's
// Content-Security-Policy (`script-src 'self' 'wasm-unsafe-eval' blob:`, no
// 'unsafe-eval') refuses that, so the export failed in the browser. The Writer only
// appends bytes; nothing here generates code at run time.
//
// Wire format (Protocol Buffers encoding): every field is a varint key
// `field_number << 3 | wire_type`, then its value — wire type 0 a varint (int32, int64,
// enums), 2 a length-prefixed run (strings, bytes, submessages, packed repeated
// scalars), 5 four little-endian bytes (float). Submessages are written between
// `fork()` and `ldelim()`, which prefixes the run with its length. Fields go out in
// ascending field number, as protobufjs's reflection encoder wrote them, and with
// proto3's implicit presence: a scalar at its default (0, "", empty bytes or list) is
// not written and reads back as that default — an AttributeProto `axis` of 0 is just
// its name and `type` INT. Members of a oneof (Dimension's dim_value / dim_param) and
// submessages have explicit presence and are always written. So the bytes equal those
// of the former reflection encoder.

import protobuf from 'protobufjs/minimal.js';

/** TensorProto.DataType values used here (onnx.proto3). */
export const DataType = { FLOAT: 1, INT8: 3, INT64: 7 } as const;

/** AttributeProto.AttributeType values used here (onnx.proto3). */
export const AttributeType = { FLOAT: 1, INT: 2, INTS: 7 } as const;

export interface TensorProto {
  name: string;
  dims: number[];
  dataType: number;
  /** little-endian element bytes */
  rawData: Uint8Array;
}

export interface AttributeProto {
  name: string;
  type: number;
  f?: number;
  i?: number;
  ints?: number[];
}

export interface NodeProto {
  input: string[];
  output: string[];
  name: string;
  opType: string;
  attribute: AttributeProto[];
}

/** A dimension is a fixed size or a symbolic name (a dynamic axis). */
export type Dim = number | string;

export interface ValueInfoProto {
  name: string;
  elemType: number;
  shape: Dim[];
}

export interface ModelSpec {
  irVersion: number;
  opsetVersion: number;
  producerName: string;
  producerVersion: string;
  docString: string;
  graphName: string;
  nodes: NodeProto[];
  initializers: TensorProto[];
  inputs: ValueInfoProto[];
  outputs: ValueInfoProto[];
  metadata: Record<string, string>;
}

type Writer = protobuf.Writer;

/** Protocol Buffers wire types. */
const VARINT = 0;
const LEN = 2;
const FIXED32 = 5;

/** The key that opens a field. */
function key(w: Writer, field: number, wireType: number): Writer {
  return w.uint32((field << 3) | wireType);
}

// Scalars with proto3 implicit presence: nothing is written for the default value.
function string(w: Writer, field: number, value: string): void {
  if (value !== '') key(w, field, LEN).string(value);
}
function int32(w: Writer, field: number, value: number): void {
  if (value !== 0) key(w, field, VARINT).int32(value);
}
function int64(w: Writer, field: number, value: number): void {
  if (value !== 0) key(w, field, VARINT).int64(value);
}
function float(w: Writer, field: number, value: number): void {
  if (value !== 0 || Object.is(value, -0)) key(w, field, FIXED32).float(value);
}
function bytes(w: Writer, field: number, value: Uint8Array): void {
  if (value.length > 0) key(w, field, LEN).bytes(value);
}
/** A packed repeated int64 (proto3 packs repeated scalars by default). */
function int64s(w: Writer, field: number, values: number[]): void {
  if (values.length > 0) key(w, field, LEN).int64s(values);
}
/** A repeated string: one field per element, empty strings included. */
function strings(w: Writer, field: number, values: string[]): void {
  for (const v of values) key(w, field, LEN).string(v);
}

/** A length-delimited submessage: key, then `body` between fork and ldelim. */
function message(w: Writer, field: number, body: (w: Writer) => void): void {
  key(w, field, LEN).fork();
  body(w);
  w.ldelim();
}

// AttributeProto (onnx.proto3): name = 1, f = 2 (float), i = 3 (int64),
// ints = 8 (repeated int64, packed), type = 20 (AttributeType).
function writeAttribute(w: Writer, a: AttributeProto): void {
  string(w, 1, a.name);
  if (a.f !== undefined) float(w, 2, a.f);
  if (a.i !== undefined) int64(w, 3, a.i);
  if (a.ints !== undefined) int64s(w, 8, a.ints);
  int32(w, 20, a.type);
}

// NodeProto (onnx.proto3): input = 1, output = 2 (repeated string), name = 3,
// op_type = 4, attribute = 5 (repeated AttributeProto). domain = 7 is left out: absent
// is "", the default ONNX operator set.
function writeNode(w: Writer, n: NodeProto): void {
  strings(w, 1, n.input);
  strings(w, 2, n.output);
  string(w, 3, n.name);
  string(w, 4, n.opType);
  for (const a of n.attribute) message(w, 5, (w) => writeAttribute(w, a));
}

// TensorProto (onnx.proto3): dims = 1 (repeated int64, packed), data_type = 2,
// name = 8, raw_data = 9 (fixed-width little-endian element bytes).
function writeTensor(w: Writer, t: TensorProto): void {
  int64s(w, 1, t.dims);
  int32(w, 2, t.dataType);
  string(w, 8, t.name);
  bytes(w, 9, t.rawData);
}

// ValueInfoProto (onnx.proto3): name = 1, type = 2 (TypeProto).
//   TypeProto: tensor_type = 1 (TypeProto.Tensor, member of oneof value).
//   TypeProto.Tensor: elem_type = 1 (a TensorProto.DataType), shape = 2 (TensorShapeProto).
//   TensorShapeProto: dim = 1 (repeated Dimension).
//   TensorShapeProto.Dimension: oneof value { dim_value = 1 (int64), dim_param = 2 (string) }.
function writeValueInfo(w: Writer, v: ValueInfoProto): void {
  string(w, 1, v.name);
  message(w, 2, (w) =>
    message(w, 1, (w) => {
      int32(w, 1, v.elemType);
      message(w, 2, (w) => {
        for (const d of v.shape) {
          // oneof members have explicit presence: written even when 0 or ""
          message(w, 1, (w) => (typeof d === 'number' ? key(w, 1, VARINT).int64(d) : key(w, 2, LEN).string(d)));
        }
      });
    }),
  );
}

// GraphProto (onnx.proto3): node = 1, name = 2, initializer = 5, input = 11, output = 12.
function writeGraph(w: Writer, spec: ModelSpec): void {
  for (const n of spec.nodes) message(w, 1, (w) => writeNode(w, n));
  string(w, 2, spec.graphName);
  for (const t of spec.initializers) message(w, 5, (w) => writeTensor(w, t));
  for (const v of spec.inputs) message(w, 11, (w) => writeValueInfo(w, v));
  for (const v of spec.outputs) message(w, 12, (w) => writeValueInfo(w, v));
}

/** Serialises a model to the bytes of an `.onnx` file. */
export function encodeModelProto(spec: ModelSpec): Uint8Array {
  const w = protobuf.Writer.create();
  // ModelProto (onnx.proto3): ir_version = 1, producer_name = 2, producer_version = 3,
  // doc_string = 6, graph = 7, opset_import = 8, metadata_props = 14.
  int64(w, 1, spec.irVersion);
  string(w, 2, spec.producerName);
  string(w, 3, spec.producerVersion);
  string(w, 6, spec.docString);
  message(w, 7, (w) => writeGraph(w, spec));
  // OperatorSetIdProto: domain = 1 (absent: "", the default ONNX operator set), version = 2.
  message(w, 8, (w) => int64(w, 2, spec.opsetVersion));
  // StringStringEntryProto: key = 1, value = 2.
  for (const [k, v] of Object.entries(spec.metadata)) {
    message(w, 14, (w) => {
      string(w, 1, k);
      string(w, 2, v);
    });
  }
  return w.finish();
}
