package blocks

import "encoding/binary"

var (
	binaryAppendVarint = binary.AppendVarint
)
