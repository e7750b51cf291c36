module winnow

go 1.26

require (
	github.com/chromedp/cdproto v0.160.1 // indirect
	github.com/chromedp/chromedp v0.23.1 // indirect
	github.com/evanw/esbuild v0.28.2 // indirect
	github.com/go-json-experiment/json v0.0.0-20260213210345-44df1a37e875 // indirect
	github.com/klauspost/compress v1.20.4 // indirect
	gonum.org/v1/gonum v0.17.0 // indirect
)
