package web

import (
	"encoding/json"
	"fmt"
	"strings"
	"testing"

	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// TestOptionOfExtras checks the fields OptionOf adds to go-echarts' option
// object, and what it leaves out.
func TestOptionOfExtras(t *testing.T) {
	c := NewChart()
	c.SetGlobalOptions(charts.WithXAxisOpts(opts.XAxis{Type: "time"}), charts.WithTooltipOpts(opts.Tooltip{Trigger: "item"}))
	c.AddSeries("visits", nil, WithData([]Point{{Value: [2]any{"2024-01-01", 9.5}, Tip: []string{"a", "b"}}}))
	c.AddSeries("bar", nil, WithData([][2]float64{{1, 2}}))
	o := OptionOf(c, Extras{UseUTC: true, Confine: true, Series: []SeriesExtra{{Z: 3, Silent: true, EndLabel: &opts.Label{Show: opts.Bool(true), Formatter: "{a}"}}}})
	b, err := json.Marshal(o)
	if err != nil {
		t.Fatal(err)
	}
	var got struct {
		UseUTC    bool `json:"useUTC"`
		Animation bool `json:"animation"`
		Tooltip   struct {
			Trigger string `json:"trigger"`
			Confine bool   `json:"confine"`
		} `json:"tooltip"`
		Series []struct {
			Name     string `json:"name"`
			Z        int    `json:"z"`
			Silent   bool   `json:"silent"`
			EndLabel *struct {
				Formatter string `json:"formatter"`
			} `json:"endLabel"`
			Data json.RawMessage `json:"data"`
		} `json:"series"`
		Title   any `json:"title"`
		Toolbox any `json:"toolbox"`
	}
	if err := json.Unmarshal(b, &got); err != nil {
		t.Fatal(err)
	}
	if !got.UseUTC || got.Animation || got.Tooltip.Trigger != "item" || !got.Tooltip.Confine {
		t.Errorf("root: useUTC %v animation %v tooltip %+v", got.UseUTC, got.Animation, got.Tooltip)
	}
	if len(got.Series) != 2 || got.Series[0].Z != 3 || !got.Series[0].Silent || got.Series[0].EndLabel == nil ||
		got.Series[0].EndLabel.Formatter != "{a}" || got.Series[1].Z != 0 || got.Series[1].EndLabel != nil {
		t.Errorf("series extras: %s", b)
	}
	if string(got.Series[0].Data) != `[{"value":["2024-01-01",9.5],"tip":["a","b"]}]` || string(got.Series[1].Data) != `[[1,2]]` {
		t.Errorf("series data: %s and %s", got.Series[0].Data, got.Series[1].Data)
	}
	if got.Title != nil || got.Toolbox != nil {
		t.Errorf("title %v, toolbox %v: want both left out", got.Title, got.Toolbox)
	}
	// go-echarts' default assets host must never reach an option, nor its
	// function marker.
	for _, bad := range []string{"http", "__f__", "go-echarts.github.io"} {
		if strings.Contains(string(b), bad) {
			t.Errorf("option holds %q: %s", bad, b)
		}
	}
}

// ExampleOptionOf builds a chart with go-echarts' typed options and hands
// its option object on, with the fields go-echarts lacks.
func ExampleOptionOf() {
	c := NewChart()
	c.SetGlobalOptions(charts.WithXAxisOpts(opts.XAxis{Type: "time"}))
	c.AddSeries("posterior dominant rhythm", nil, WithData([]Point{{Value: [2]any{"2024-03-11", 9.4}, Tip: []string{"2024-03-11", "9.4 Hz"}}}))
	o := OptionOf(c, Extras{UseUTC: true})
	b, _ := json.Marshal(o["series"])
	fmt.Println(o["useUTC"], string(b))
	// Output: true [{"name":"posterior dominant rhythm","type":"line","data":[{"value":["2024-03-11",9.4],"tip":["2024-03-11","9.4 Hz"]}],"animation":false}]
}
