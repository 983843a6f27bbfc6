// Types for vite's import suffixes (`?inline` CSS) used by the elements.
/// <reference types="vite/client" />
