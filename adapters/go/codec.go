package adapter

import (
	"fmt"

	"google.golang.org/protobuf/proto"
)

// codec encodes the Connector and Broker messages with the protobuf runtime
// the stubs were generated for (google.golang.org/protobuf). gRPC's default
// codec goes through github.com/golang/protobuf, and Debian 12 ships a
// version of it (1.3) that cannot encode such messages; naming the codec on
// the server and on every broker call keeps the adapter independent of which
// version is installed.
type codec struct{}

func (codec) Marshal(v interface{}) ([]byte, error) {
	m, ok := v.(proto.Message)
	if !ok {
		return nil, fmt.Errorf("adapter codec: cannot marshal %T, not a protobuf message", v)
	}
	return proto.Marshal(m)
}

func (codec) Unmarshal(data []byte, v interface{}) error {
	m, ok := v.(proto.Message)
	if !ok {
		return fmt.Errorf("adapter codec: cannot unmarshal into %T, not a protobuf message", v)
	}
	return proto.Unmarshal(data, m)
}

// Name is the content-subtype on the wire: "proto", the default.
func (codec) Name() string { return "proto" }

// String serves the older codec interface the server option takes.
func (codec) String() string { return "proto" }
