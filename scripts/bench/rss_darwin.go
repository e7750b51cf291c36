//go:build !js && !wasip1

package main

const rssInBytes = true
