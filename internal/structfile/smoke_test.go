package structfile

import "testing"

func TestSmokeFootbridge(t *testing.T) {
	s, err := LoadFile("../../testdata/footbridge/structure.yaml")
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("%d nodes %d members %d patterns %d cases hash %s", len(s.Nodes), len(s.Members), len(s.Patterns), len(s.Cases), s.Hash)
	t.Logf("%+v", s.Members[0])
	t.Logf("%+v", s.Supports)
}
