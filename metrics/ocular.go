package metrics

// OcularSettings say how eye artefacts are corrected before referencing
// (settings v2 onward).
type OcularSettings struct {
	Method string `json:"method"`
}

func defaultOcular() *OcularSettings {
	return &OcularSettings{Method: "none"}
}
