package metrics

// UncertaintySettings say how every marker's interval is made (settings v2
// onward).
type UncertaintySettings struct {
	Level float64 `json:"level"`
}

func defaultUncertainty() *UncertaintySettings {
	return &UncertaintySettings{Level: 0.95}
}
