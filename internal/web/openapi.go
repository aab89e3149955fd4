package web

import (
	"net/http"
)

// openAPI is the API definition, an OpenAPI 3.0 document
// (/req/oas30/oas-definition-1, /req/oas30/completeness): every resource
// the site serves, each parameter and each status it answers.
func (s *Server) openAPI() map[string]any {
	ref := func(name string) map[string]any { return map[string]any{"$ref": "#/components/parameters/" + name} }
	resp := func(name string) map[string]any { return map[string]any{"$ref": "#/components/responses/" + name} }
	errs := func(r map[string]any, codes ...string) map[string]any {
		for _, c := range codes {
			r[c] = resp(map[string]string{"400": "InvalidParameter", "404": "NotFound", "414": "TooLong", "500": "ServerError", "304": "NotModified"}[c])
		}
		return r
	}
	content := func(types ...string) map[string]any {
		c := map[string]any{}
		for _, t := range types {
			schema := map[string]any{"type": "object"}
			if t == "text/html" {
				schema = map[string]any{"type": "string"}
			}
			c[t] = map[string]any{"schema": schema}
		}
		return c
	}
	op := func(id, summary string, params []any, ok map[string]any, codes ...string) map[string]any {
		return map[string]any{"get": map[string]any{
			"operationId": id, "summary": summary, "parameters": params,
			"responses": errs(map[string]any{"200": map[string]any{"description": summary, "content": ok}}, codes...),
		}}
	}
	jsonHTML := content("application/json", "text/html")
	return map[string]any{
		"openapi": "3.0.3",
		"info": map[string]any{
			"title":       "cairn benchmark register",
			"version":     s.cfg.Version,
			"description": "A survey office's register of benchmarks, read-only: OGC API – Features – Part 1: Core (classes Core, GeoJSON, HTML, OpenAPI 3.0). " + cautionsLine(),
		},
		"servers": []any{map[string]any{"url": "/"}},
		"paths": map[string]any{
			"/":            op("getLandingPage", "The landing page", []any{ref("f"), ref("as_of")}, jsonHTML, "304", "400", "414", "500"),
			"/conformance": op("getConformanceDeclaration", "The conformance classes implemented", []any{ref("f"), ref("as_of")}, jsonHTML, "304", "400", "414", "500"),
			"/api":         op("getAPIDefinition", "This API definition", []any{ref("f"), ref("as_of")}, content(mediaOpenAPI, "text/html"), "304", "400", "414", "500"),
			"/collections": op("getCollections", "The collections", []any{ref("f"), ref("as_of")}, jsonHTML, "304", "400", "414", "500"),
			"/collections/{collectionId}": op("describeCollection", "The collection of marks", []any{ref("collectionId"), ref("f"), ref("as_of")},
				jsonHTML, "304", "400", "404", "414", "500"),
			"/collections/{collectionId}/items": op("getFeatures", "A page of marks", []any{ref("collectionId"), ref("f"), ref("bbox"), ref("limit"),
				ref("datetime"), ref("as_of"), ref("after")}, content(mediaGeoJSON, "text/html"), "304", "400", "404", "414", "500"),
			"/collections/{collectionId}/items/{featureId}": op("getFeature", "One mark", []any{ref("collectionId"), ref("featureId"), ref("f"),
				ref("datetime"), ref("as_of")}, content(mediaGeoJSON), "304", "400", "404", "414", "500"),
			"/search": op("search", "Marks by designation or alias, or within a radius of a point (HTML)", []any{
				map[string]any{"name": "q", "in": "query", "required": false, "schema": map[string]any{"type": "string"}, "description": "a designation or alias"},
				map[string]any{"name": "lat", "in": "query", "required": false, "schema": map[string]any{"type": "number", "minimum": -90, "maximum": 90}},
				map[string]any{"name": "lon", "in": "query", "required": false, "schema": map[string]any{"type": "number", "minimum": -180, "maximum": 180}},
				map[string]any{"name": "radius_m", "in": "query", "required": false, "schema": map[string]any{"type": "number", "exclusiveMinimum": true, "minimum": 0, "maximum": 100000}},
				ref("as_of")}, content("text/html"), "304", "400", "414", "500"),
			"/map": op("getMap", "The map of the marks near a point (HTML; the marks are drawn from the items)", []any{
				map[string]any{"name": "lat", "in": "query", "required": false, "schema": map[string]any{"type": "number", "minimum": -90, "maximum": 90}},
				map[string]any{"name": "lon", "in": "query", "required": false, "schema": map[string]any{"type": "number", "minimum": -180, "maximum": 180}},
				map[string]any{"name": "radius_m", "in": "query", "required": false, "schema": map[string]any{"type": "number", "exclusiveMinimum": true, "minimum": 0, "maximum": 100000}},
				ref("as_of")}, content("text/html"), "304", "400", "414", "500"),
			"/marks/{designation}": op("getMarkPage", "A mark's datasheet with its history (HTML)", []any{
				map[string]any{"name": "designation", "in": "path", "required": true, "schema": map[string]any{"type": "string"}},
				ref("as_of")}, content("text/html"), "304", "400", "404", "414", "500"),
			"/trace/{designation}": op("getTracePage", "How each height of a mark in force was derived (HTML)", []any{
				map[string]any{"name": "designation", "in": "path", "required": true, "schema": map[string]any{"type": "string"}},
				ref("as_of")}, content("text/html"), "304", "400", "404", "414", "500"),
		},
		"components": map[string]any{
			"parameters": map[string]any{
				"f": map[string]any{"name": "f", "in": "query", "required": false, "description": "the encoding, instead of the Accept header",
					"schema": map[string]any{"type": "string", "enum": []string{"json", "html"}}, "style": "form", "explode": false},
				"as_of": map[string]any{"name": "as_of", "in": "query", "required": false,
					"description": "show what was in force at this instant: a date (the end of that day, UTC) or an RFC 3339 date-time",
					"schema":      map[string]any{"type": "string"}},
				"datetime": map[string]any{"name": "datetime", "in": "query", "required": false,
					"description": "an instant (RFC 3339 date-time, or a date: the end of that day, UTC): each mark's heights in force then; every mark matches. Intervals are refused.",
					"schema":      map[string]any{"type": "string"}, "style": "form", "explode": false},
				"bbox": map[string]any{"name": "bbox", "in": "query", "required": false,
					"description": "west,south,east,north in WGS 84 longitude and latitude (CRS84); west above east crosses the antimeridian",
					"schema":      map[string]any{"type": "array", "minItems": 4, "maxItems": 4, "items": map[string]any{"type": "number"}},
					"style":       "form", "explode": false},
				"limit": map[string]any{"name": "limit", "in": "query", "required": false,
					"schema": map[string]any{"type": "integer", "minimum": 1, "maximum": MaxLimit, "default": DefaultLimit}, "style": "form", "explode": false},
				"after": map[string]any{"name": "after", "in": "query", "required": false,
					"description": "start after this designation (the next link sets it)", "schema": map[string]any{"type": "string"}},
				"collectionId": map[string]any{"name": "collectionId", "in": "path", "required": true,
					"schema": map[string]any{"type": "string", "enum": []string{collectionID}}},
				"featureId": map[string]any{"name": "featureId", "in": "path", "required": true,
					"description": "a mark's designation (an alias redirects to it)", "schema": map[string]any{"type": "string"}},
			},
			"responses": map[string]any{
				"InvalidParameter": map[string]any{"description": "a parameter unknown, given twice or not valid", "content": content("application/json", "text/html")},
				"NotFound":         map[string]any{"description": "no such collection or mark", "content": content("application/json", "text/html")},
				"TooLong":          map[string]any{"description": "the query is longer than the site answers", "content": content("application/json", "text/html")},
				"ServerError":      map[string]any{"description": "the register could not be read", "content": content("application/json", "text/html")},
				"NotModified":      map[string]any{"description": "the register has not changed since the ETag given in If-None-Match"},
			},
		},
	}
}

// api is the API definition (/req/core/api-definition-op,
// /req/core/api-definition-success): the OpenAPI document, or a page
// that links to it.
func (s *Server) api(w http.ResponseWriter, r *http.Request) {
	f, asOf, ok := s.begin(w, r, "f", "as_of")
	if !ok {
		return
	}
	st, err := s.cfg.Register.State(r.Context())
	if err != nil {
		s.serverError(w, r, err)
		return
	}
	if f == formatHTML {
		s.page(w, r, st, asOf, "api", "API · cairn", nil,
			link{Href: "/api?f=html", Rel: "self", Type: "text/html", Title: "This page"},
			link{Href: "/api?f=json", Rel: "service-desc", Type: mediaOpenAPI, Title: "The API definition (OpenAPI 3.0)"})
		return
	}
	s.json(w, r, st, mediaOpenAPI, s.openAPI())
}
