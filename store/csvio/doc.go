// Package csvio imports and exports kelvard's register as CSV, one file per
// kind (sites, areas, models, positions, drives, installations, components,
// events), so a fleet can be kept in a spreadsheet. Files name other objects
// by natural key (a site's name, a position's tag, a drive's serial), never
// by id, and flatten nested objects into dotted columns. An import runs in
// one transaction through the store's own create, update and move
// operations, so validation, site limits and audit are those of the API;
// export writes the same format in a stable order. DEVELOPERS.md, "CSV
// formats", is the reference for the columns and the rules.
package csvio
