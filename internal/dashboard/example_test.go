package dashboard_test

import (
	"context"
	"fmt"
	"io"
	"net/http/httptest"
	"time"

	"trussmonitor/internal/dashboard"
)

// oneBar is a Source over a single gauged bar, enough to show the API.
type oneBar struct{}

func (oneBar) Structures() []string { return []string{"tie"} }

func (oneBar) State(string) (dashboard.State, error) {
	return dashboard.State{
		Structure: "tie", Epoch: time.Date(2026, 6, 14, 9, 0, 0, 0, time.UTC), CriticalValue: 3.29,
		Geometry: dashboard.Geometry{Dimension: 2,
			Nodes:   []dashboard.Node{{ID: "A"}, {ID: "B", X: 4}},
			Members: []dashboard.Member{{ID: "M1", Start: "A", End: "B", Gauged: true}}},
		Gauged: []dashboard.MemberState{{ID: "M1", Measured: 10500, Predicted: 10000, SigmaResidual: 250, W: 2, Redundancy: 1, MDB: 1032.5, Checkable: true}},
	}, nil
}

func (oneBar) Series(string, string, time.Time, time.Time) (dashboard.Series, error) {
	return dashboard.Series{}, nil
}

func (oneBar) Events(context.Context, string, time.Time, time.Time) ([]dashboard.Event, error) {
	return nil, nil
}

func ExampleNew() {
	srv := httptest.NewServer(dashboard.New(oneBar{}, dashboard.Options{}))
	defer srv.Close()
	resp, err := srv.Client().Get(srv.URL + "/api/structures/nowhere/state")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	fmt.Print(resp.StatusCode, " ", string(b))
	// Output:
	// 404 {
	//   "error": "unknown structure; known structures: tie"
	// }
}
