package blocks

import "encoding/binary"

var (
	binaryAppendUvarint = binary.AppendUvarint
	binaryAppendVarint  = binary.AppendVarint
)
